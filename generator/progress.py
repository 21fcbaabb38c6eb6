"""Progress of long builds: a click progress bar on a terminal, nothing in pipes or CI.

The derivation reports each finished kernel through a callback (`pipeline.build(progress=...)`).
`Progress` shows a bar only once a build has run for more than `delay` seconds (about a second),
and only when its stream is a terminal and the CI environment variable is unset, so redirected
output, logs and tests stay clean.  The clock is injectable, so the behaviour is testable without
waiting.
"""
from __future__ import annotations

import os
import sys
import time

import click


def interactive(stream, env=None) -> bool:
    env = os.environ if env is None else env
    return bool(getattr(stream, "isatty", lambda: False)()) and not env.get("CI")


class Progress:
    """Callback `progress(done, total, label)`; use as a context manager so the bar is finished."""

    def __init__(self, enabled: bool = True, stream=None, env=None, clock=time.monotonic,
                 delay: float = 1.0):
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = enabled and interactive(self.stream, env)
        self.clock, self.delay, self.start = clock, delay, clock()
        self.bar, self.label = None, None

    def __call__(self, done: int, total: int, label: str) -> None:
        if not self.enabled or self.clock() - self.start < self.delay:
            return
        if self.bar is None or self.label != label:
            self.finish()
            self.bar = click.progressbar(length=total, label=label, file=self.stream)
            self.label = label
        self.bar.update(done - self.bar.pos)

    def finish(self) -> None:
        if self.bar is not None:
            self.bar.render_finish()
            self.bar = None

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc) -> None:
        self.finish()
