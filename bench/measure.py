"""Timers for the benchmarks: repetitions of a callable, reported as median, min and max.

Everything timed here is a `run(number)` callable that performs `number` calls of the thing
measured: a Python loop for numpy, numba and scipy, one ctypes call that loops in C for the
emitted C kernels (so the ctypes call overhead, about a microsecond, is paid once per repetition
and not once per kernel call).  `number` is calibrated so that one repetition lasts at least
`min_time` seconds, then `reps` repetitions are taken with `time.perf_counter`.  The garbage
collector is off while timing, as in `timeit`.

`interleaved` times several callables that are to be compared (one case's implementations) in
rounds, one repetition of each per round, so that a slow spell of the machine (a neighbour on a
shared VM, a frequency change) lands on all of them alike instead of on whichever was timed
then; their ratios then flip less between runs.
"""
from __future__ import annotations

import gc
import math
import statistics
import time
import timeit
from dataclasses import dataclass


@dataclass(frozen=True)
class Stats:
    """Seconds per call: the median, minimum and maximum over the repetitions."""

    median: float
    low: float
    high: float
    reps: int

    def scaled(self, factor: float) -> "Stats":
        """The same figures times `factor` (e.g. 1e9 / N for nanoseconds per element)."""
        return Stats(self.median * factor, self.low * factor, self.high * factor, self.reps)


def loop(fn):
    """`fn()` as a `run(number)` callable."""
    def run(number: int) -> None:
        for _ in range(number):
            fn()
    return run


def once(run, number: int) -> float:
    """Seconds for one repetition of `number` calls, with the garbage collector off."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        start = time.perf_counter()
        run(number)
        return time.perf_counter() - start
    finally:
        if enabled:
            gc.enable()


def calibrate(run, min_time: float) -> int:
    """A number of calls that lasts about `min_time`, estimated after a warm-up call."""
    number, seconds = 1, once(run, 1)        # the first call is also the warm-up
    while seconds < min_time / 10 and number < 10 ** 7:
        number *= 10
        seconds = once(run, number)
    return max(1, math.ceil(number * min_time / max(seconds, 1e-9)))


def measure(run, reps: int, min_time: float) -> Stats:
    """Seconds per call of `run`, over `reps` repetitions of a calibrated number of calls."""
    number = calibrate(run, min_time)
    times = [once(run, number) / number for _ in range(reps)]
    return Stats(statistics.median(times), min(times), max(times), reps)


def interleaved(runs: dict, reps: dict, min_time: float) -> dict:
    """{name: Stats} for `runs` ({name: run}) timed in rounds: round r takes one repetition of
    each run that asks for more than r (`reps[name]`), in the order given."""
    numbers = {name: calibrate(run, min_time) for name, run in runs.items()}
    times = {name: [] for name in runs}
    for r in range(max(reps.values(), default=0)):
        for name, run in runs.items():
            if r < reps[name]:
                times[name].append(once(run, numbers[name]) / numbers[name])
    return {name: Stats(statistics.median(t), min(t), max(t), len(t)) for name, t in times.items()}


def statement(stmt: str, namespace: dict):
    """`stmt` (evaluated in `namespace`) as a `run(number)` callable, inlined as `timeit` does,
    so that single calls of a fraction of a microsecond carry no extra Python call."""
    return timeit.Timer(stmt, globals=namespace).timeit


def wall(fn) -> tuple[float, object]:
    """(seconds, result) of one call of `fn`."""
    start = time.perf_counter()
    result = fn()
    return time.perf_counter() - start, result
