"""Time the throughput cases at each N, and single-element calls from Python.

`setup` loads what the example builds emitted (C library, numba module, dense tables) for the
specs the cases use; `kernels` times every implementation of every case at every N, in rounds of
one repetition of each (`measure.interleaved`), and returns nanoseconds per element; `singles`
times one call of the rotor product from Python, in microseconds, beside numpy-quaternion's
single multiply.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

import loaders
import memory
from cases import CASES, IMPLEMENTATIONS, SPECS, Context, agreement, make_data
from dense import Dense
from measure import interleaved, measure, statement

SLOW = {"einsum"}       # compute bound: fewer repetitions at the largest N (see `repetitions`)


def setup(built: dict, specs_dir: Path, tmp: Path) -> Context:
    """The Context for the cases, from the example builds (`{spec name: loaders.Built}`)."""
    used = {s: sorted({c.kernel for c in CASES if c.spec == s}) for s in SPECS}
    return Context(
        built={s: built[s] for s in SPECS},
        c={s: loaders.CLibrary(built[s], used[s], tmp) for s in SPECS},
        numba={s: loaders.load_module(built[s].out / f"{s}_numba.py", "numba") for s in SPECS},
        dense={s: Dense(specs_dir / f"{s}.toml", built[s].manifest) for s in SPECS})


def check(ctx: Context) -> dict[str, float]:
    """Relative disagreement of C, numba and einsum per case (this also compiles numba)."""
    return {case.label: agreement(ctx, case) for case in CASES}


def repetitions(name: str, n: int, reps: int, sizes) -> int:
    return max(1, min(reps, 3)) if name in SLOW and n == max(sizes) else reps


def kernels(ctx: Context, sizes, reps: int, min_time: float) -> dict:
    """{(case label, N): {implementation: Stats in ns per element}}."""
    results = {}
    for case in CASES:
        for n in sizes:
            log(f"  {case.label}, N = {n:,}")
            results[(case.label, n)] = time_case(ctx, case, n, reps, min_time, sizes)
    return results


def time_case(ctx: Context, case, n: int, reps: int, min_time: float, sizes) -> dict:
    """{implementation: Stats in ns per element}, the implementations timed in rounds."""
    d = make_data(ctx, case, n)
    runs = {name: make(ctx, case, d) for name, make in IMPLEMENTATIONS.items()}
    runs = {name: run for name, run in runs.items() if run is not None}
    stats = interleaved(runs, {name: repetitions(name, n, reps, sizes) for name in runs}, min_time)
    share = memory.huge_share(d.arrays())
    if share is not None and n == max(sizes):
        ctx.huge[case.label] = share
    return {name: s.scaled(1e9 / n) for name, s in stats.items()}


def singles(ctx: Context, reps: int, min_time: float) -> list[tuple[str, object]]:
    """[(label, Stats in µs per call)] for one rotor product called from Python."""
    import quaternion
    built, nb = ctx.built["drone"], ctx.numba["drone"]
    a, b = (0.5, 0.5, -0.5, 0.5), (0.1, 0.7, 0.1, -0.7)
    x, y, out = np.array([a]), np.array([b]), np.zeros((1, 4))
    ns = {"py": loaders.load_module(built.out / "drone.py", "python"), "nb": nb, "a": a, "b": b,
          "x": x[0], "y": y[0], "x1": x, "y1": y, "o1": out,
          "q1": quaternion.quaternion(*a), "q2": quaternion.quaternion(*b),
          "c1": ctx.c["drone"].runner("compose", x, y, out)}
    nb.compose(a, b), nb.compose(x[0], y[0]), nb.compose_batch(x, y, out=out)   # compile first
    return [(label, measure(statement(stmt, ns), reps, min_time).scaled(1e6))
            for label, stmt in SINGLES]


SINGLES = (
    ("Python target `drone.compose(a, b)`, tuples of floats", "py.compose(a, b)"),
    ("numba scalar `drone_numba.compose(a, b)`, tuples of floats", "nb.compose(a, b)"),
    ("numba scalar `drone_numba.compose(x, y)`, (4,) arrays", "nb.compose(x, y)"),
    ("numpy-quaternion `q1 * q2`", "q1 * q2"),
    ("numba `compose_batch` on one row, `out=` (call overhead)",
     "nb.compose_batch(x1, y1, out=o1)"),
    ("C `drone_compose_n` on one element through ctypes (call overhead)", "c1(1)"),
)


def log(text: str) -> None:
    print(text, file=sys.stderr, flush=True)
