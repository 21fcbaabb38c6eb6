"""Kernel throughput: the cases, their inputs, and every implementation timed on them.

A case is one emitted kernel of an example spec (`CASES`), timed at each N in float64 against
the same arrays by every row of `IMPLEMENTATIONS`:

- `C`: the header's `NAME_K_n` (or `NAME_K_fixed_n` for one element against N), `-O3
  -march=native`, looped in C (loaders.py);
- `numba`: the emitted `K_batch(a, b, out=out)`, argument checks included, no allocation;
- `stream`: numpy moving the same bytes (see `Stream`);
- `einsum`: the dense generic-library product (dense.py);
- `numpy-quaternion`: `np.multiply(qa, qb, out=qc)` on quaternion views of the same arrays;
- `scipy`: `Rotation.apply(v)` of `Rotation.from_quat` of the rotors, made before timing.

Inputs are uniform in [-1, 1], the first argument normalized to unit length (a unit rotor for
scipy and numpy-quaternion).  Every array timed comes from `memory.array` (its own 2 MiB-aligned
mapping, advised for huge pages, written once before timing, so page faults are not timed).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

import memory
from measure import loop


@dataclass(frozen=True)
class Case:
    label: str                  # what the case is, in the tables
    spec: str                   # example spec (specs/NAME.toml)
    kernel: str                 # emitted kernel
    one: bool = False           # one element `a` against N elements `b`
    peer: str = ""              # the outside library for this case, if any


CASES = (
    Case("rotor product (drone compose)", "drone", "compose", peer="numpy-quaternion"),
    Case("rotor-vector sandwich, N rotors (drone rotate)", "drone", "rotate", peer="scipy"),
    Case("one rotor on N vectors (drone rotate)", "drone", "rotate", one=True, peer="scipy"),
    Case("motor-point sandwich (arm move_point)", "arm", "move_point"),
    Case("motor composition (arm compose)", "arm", "compose"),
    Case("full 3D product, 8 x 8 (drone full_product)", "drone", "full_product"),
    Case("conformal translator on points (raytrace translate)", "raytrace", "translate"),
)
SPECS = tuple(sorted({c.spec for c in CASES}))


@dataclass
class Context:
    """What the implementations need: per spec, the build, C library, numba module, dense form."""

    built: dict
    c: dict
    numba: dict
    dense: dict
    notes: dict = field(default_factory=dict)     # case label -> remarks for the tables
    huge: dict = field(default_factory=dict)      # case label -> share on huge pages, largest N

    def note(self, case: Case, text: str) -> None:
        self.notes.setdefault(case.label, [])
        if text not in self.notes[case.label]:
            self.notes[case.label].append(text)


@dataclass
class Data:
    """The arrays of one case at one N; the dense ones are made on demand."""

    a: np.ndarray
    b: np.ndarray
    out: np.ndarray
    dense: tuple = ()
    repeated: np.ndarray | None = None      # `a` repeated N times, for C without `_fixed_n`
    stream: tuple = ()                      # the streaming baseline's arrays

    def arrays(self) -> list:
        """Every array timed on: the kernel's (a, b, out) and the stream's."""
        return [self.a, self.b, self.out] + list(self.stream)


def sandwich(ctx: Context, case: Case) -> bool:
    return ctx.built[case.spec].kernel(case.kernel)["op"] == "sandwich"


def widths(ctx: Context, case: Case) -> tuple[int, int, int]:
    built = ctx.built[case.spec]
    k = built.kernel(case.kernel)
    return tuple(built.width(t) for t in (*k["args"], k["result"]))


def make_data(ctx: Context, case: Case, n: int, seed: int = 1) -> Data:
    rng = np.random.default_rng(seed)
    ka, kb, kr = widths(ctx, case)
    a = rng.uniform(-1.0, 1.0, (1 if case.one else n, ka))
    a /= np.linalg.norm(a, axis=1, keepdims=True)
    return Data(memory.like(a), memory.like(rng.uniform(-1.0, 1.0, (n, kb))),
                memory.array((n, kr)))


def dense_data(ctx: Context, case: Case, d: Data) -> tuple:
    """(x, y, out, scratch) as dense multivectors, made once per Data."""
    if not d.dense:
        dense, (ta, tb) = ctx.dense[case.spec], ctx.built[case.spec].kernel(case.kernel)["args"]
        shape = (d.out.shape[0], dense.size)
        d.dense = (memory.like(dense.embed(ta, d.a)), memory.like(dense.embed(tb, d.b)),
                   memory.array(shape), memory.array(shape))
    return d.dense


class Stream:
    """numpy moving the bytes a kernel moves, on contiguous float64 arrays.

    `np.add(x, y, out=z)` reads two elements per element written.  A kernel that reads R and
    writes W elements is matched exactly: np.add over W elements, the other R - 2W read by
    `np.add.reduce` when R > 2W; np.add over R - W elements and `np.copyto` of the other
    2W - R when W <= R < 2W; a copy of R and a fill of W - R when R < W.  When both arguments
    and the result have the same width this is exactly `np.add(a, b, out=c)`."""

    def __init__(self, read: int, write: int):
        self.steps = [step for step in self._plan(read, write) if step[1] > 0]
        self.arrays = [[memory.array(size, 1.0) for _ in range(arity)]
                       for _, size, arity in self.steps]

    @staticmethod
    def _plan(r: int, w: int):
        if r >= 2 * w:
            return [("add", w, 3), ("read", r - 2 * w, 1)]
        if r >= w:
            return [("add", r - w, 3), ("copy", 2 * w - r, 2)]
        return [("copy", r, 2), ("fill", w - r, 1)]

    def __call__(self) -> None:
        for (kind, _, _), arrays in zip(self.steps, self.arrays):
            STEPS[kind](*arrays)


STEPS = {
    "add": lambda x, y, z: np.add(x, y, out=z),
    "read": lambda x: np.add.reduce(x),
    "copy": lambda x, z: np.copyto(z, x),
    "fill": lambda z: z.fill(0.0),
}


def run_c(ctx: Context, case: Case, d: Data):
    lib = ctx.c[case.spec]
    if case.one and case.kernel in lib.fixed:
        ctx.note(case, f"C: `{case.kernel}_fixed_n`")
        return lib.runner(case.kernel, d.a, d.b, d.out, fixed=True)
    if case.one:
        ctx.note(case, f"C: the header has no `{case.kernel}_fixed_n`; timed `_n` with the "
                       "element repeated N times (it reads those N copies too)")
        d.repeated = memory.like(np.repeat(d.a, d.out.shape[0], axis=0))
        return lib.runner(case.kernel, d.repeated, d.b, d.out)
    return lib.runner(case.kernel, d.a, d.b, d.out)


def run_numba(ctx: Context, case: Case, d: Data):
    fn = getattr(ctx.numba[case.spec], f"{case.kernel}_batch")
    return loop(lambda: fn(d.a, d.b, out=d.out))


def run_stream(ctx: Context, case: Case, d: Data):
    stream = Stream(d.a.size + d.b.size, d.out.size)
    d.stream = tuple(x for arrays in stream.arrays for x in arrays)
    return loop(stream)


def run_einsum(ctx: Context, case: Case, d: Data):
    dense = ctx.dense[case.spec]
    x, y, out, scratch = dense_data(ctx, case, d)
    if sandwich(ctx, case):
        return loop(lambda: dense.sandwich(x, y, out, scratch))
    return loop(lambda: dense.product(x, y, out))


def run_quaternion(ctx: Context, case: Case, d: Data):
    if case.peer != "numpy-quaternion":
        return None
    import quaternion
    qa, qb, qc = (quaternion.as_quat_array(x) for x in (d.a, d.b, d.out))
    return loop(lambda: np.multiply(qa, qb, out=qc))


def run_scipy(ctx: Context, case: Case, d: Data):
    if case.peer != "scipy":
        return None
    from scipy.spatial.transform import Rotation
    rotation = Rotation.from_quat(d.a[0] if case.one else d.a)
    return loop(lambda: rotation.apply(d.b))


IMPLEMENTATIONS = {
    "C": run_c,
    "numba": run_numba,
    "stream": run_stream,
    "numpy-quaternion": run_quaternion,
    "scipy": run_scipy,
    "einsum": run_einsum,
}
OURS = ("C", "numba")


def outputs(ctx: Context, case: Case, n: int = 64) -> dict[str, np.ndarray]:
    """The results of C, numba and einsum on the same small inputs (compiles numba, too)."""
    d, results = make_data(ctx, case, n, seed=7), {}
    for name in ("C", "numba", "einsum"):
        IMPLEMENTATIONS[name](ctx, case, d)(1)
        if name == "einsum":
            result_type = ctx.built[case.spec].kernel(case.kernel)["result"]
            results[name] = ctx.dense[case.spec].extract(result_type, dense_data(ctx, case, d)[2])
        else:
            results[name] = d.out.copy()
    return results


def agreement(ctx: Context, case: Case) -> float:
    """Largest difference between C, numba and einsum results, relative to the largest value."""
    got = list(outputs(ctx, case).values())
    scale = max(float(np.max(np.abs(x))) for x in got)
    return max(float(np.max(np.abs(x - got[0]))) for x in got) / scale
