"""Compare emitted kernels with the dense reference on seeded random inputs.

For every kernel and every emitted target, random inputs are fed to the emitted code (imported or
compiled from the output directory, so what is checked is what ships) and to
`reference.Reference`, which knows nothing of the derivation: it builds each input blade as the
outer product of its factors in the order of the blade's name.  Besides the result components,
the reference's value outside the result type must vanish, which shows that pruning dropped only
zeros.  Target runners are registered in `RUNNERS`.
"""
from __future__ import annotations

import importlib.util
import math
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .ir import Kernel, Module, TypeDef
from .reference import Reference, TooLarge

SAMPLES = 64
SEED = 20261202


@dataclass(frozen=True)
class Row:
    kernel: str
    target: str
    samples: int
    max_error: float
    tolerance: float
    note: str = ""
    checked: bool = True        # False: the reference could not evaluate this kernel (note says why)

    @property
    def ok(self) -> bool:
        return self.checked and bool(self.max_error <= self.tolerance)


def load_python(path: Path, tag: str):
    """Import an emitted Python file under a unique module name."""
    name = f"_bladesmith_{tag}_{abs(hash(str(path.resolve())))}"
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


def run_python(module: Module, out_dir: Path):
    emitted = load_python(out_dir / f"{module.name}.py", "py")

    def run(kernel: Kernel, inputs: list[np.ndarray]) -> np.ndarray:
        fn = getattr(emitted, kernel.name)
        n = inputs[0].shape[0]
        if uses_math(kernel):      # math.* takes floats: one call per sample
            return np.array([fn(*(tuple(map(float, x[i])) for x in inputs)) for i in range(n)])
        cols = fn(*(x.T for x in inputs))
        return np.stack([np.broadcast_to(np.asarray(c, dtype=float), (n,)) for c in cols], axis=1)
    return [("python", run, 1e-10)]


def uses_math(kernel: Kernel) -> bool:
    prog = kernel.program
    return any(_has_call(a.expr) for a in prog.temps + prog.outputs)


def _has_call(node) -> bool:
    from .ir import Call
    if isinstance(node, Call):
        return True
    children = getattr(node, "factors", None) or getattr(node, "args", None) or ()
    if hasattr(node, "terms"):
        children = [t for _, t in node.terms]
    if hasattr(node, "num"):
        children = [node.num, node.den]
    return any(_has_call(c) for c in children)


def run_numba(module: Module, out_dir: Path):
    from .native import numba_runners
    return numba_runners(module, out_dir)


def run_c(module: Module, out_dir: Path):
    from .native import c_runners
    return c_runners(module, out_dir)


# target -> runners: [(label, run(kernel, inputs) -> (N, k) array, relative tolerance[, note])];
# the tolerance may be a function rel(kernel, inputs) (float builds: see native.py); a run that
# returns None does not apply to that kernel (the one-versor paths of sandwich kernels)
RUNNERS = {"python": run_python, "numba": run_numba, "c": run_c}


class Oracle:
    """The reference evaluated on inputs given as component arrays of declared types."""

    def __init__(self, module: Module):
        self.module = module
        self.ref = Reference([list(row) for row in module.metric])
        self._basis: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    def basis(self, t: TypeDef) -> tuple[np.ndarray, np.ndarray]:
        """(signs, bitmaps): the type's named blade k is signs[k] times the reference's blade at
        bitmaps[k] (the wedge of its factors in the named order, by the reference)."""
        if t.name not in self._basis:
            bitmaps = np.array(t.bitmaps, dtype=np.int64)
            signs = np.empty(len(bitmaps))
            for k, (c, at) in enumerate(zip(t.components, bitmaps.tolist())):
                blade = self.ref.blade(c.factors)
                if abs(abs(blade[at]) - 1) > 1e-12 or np.count_nonzero(blade) != 1:
                    raise AssertionError(f"blade {c.ident} is not a signed basis blade")
                signs[k] = blade[at]
            self._basis[t.name] = (signs, bitmaps)
        return self._basis[t.name]

    def dense(self, t: TypeDef, x: np.ndarray) -> np.ndarray:
        """(N, k) components of type t as (N, 2^n) reference multivectors."""
        signs, bitmaps = self.basis(t)
        out = np.zeros((x.shape[0], self.ref.size))
        out[:, bitmaps] = x * signs
        return out

    def evaluate(self, kernel: Kernel, inputs: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
        """(expected result components (N, k), largest reference value outside the result)."""
        types = [self.module.type(t) for t in kernel.args]
        dense = [self.dense(t, x) for x, t in zip(inputs, types)]
        if kernel.op == "sandwich_matrix":
            x = types[1]
            return self._matrix(kernel, dense[0], self.dense(x, np.eye(len(x.components))))
        rows = [self._value(kernel, kernel.op, [d[i] for d in dense]) for i in range(len(dense[0]))]
        return self._split(self.module.type(kernel.result), rows)

    def _value(self, kernel: Kernel, op: str, args) -> np.ndarray:
        y = self._up(kernel, args[0]) if op == "up" else self.ref.apply(op, *args)
        if kernel.grades is not None:
            y = self.ref.project(y, list(kernel.grades))
        return np.asarray(y, dtype=float)

    def _up(self, kernel: Kernel, x: np.ndarray) -> np.ndarray:
        """x + o + c (x.x) i with c = -1 / (2 o.i), all products taken by the reference."""
        opts = dict(kernel.options)
        o = self.ref.vector(self.module.basis.index(opts["origin"]))
        i = self.ref.vector(self.module.basis.index(opts["infinity"]))
        oi = self.ref.scalar_product(o, i)[0]
        return x + o - self.ref.scalar_product(x, x)[0] / (2 * oi) * i

    def _split(self, t: TypeDef, values) -> tuple[np.ndarray, np.ndarray]:
        """Components of t (named orientation) and the largest value outside t, per sample."""
        signs, bitmaps = self.basis(t)
        mask = np.ones(self.ref.size, dtype=bool)
        mask[bitmaps] = False
        values = np.array(values, dtype=float).reshape(-1, self.ref.size)
        return values[:, bitmaps] / signs, np.max(np.abs(values[:, mask]), axis=1, initial=0.0)

    def _matrix(self, kernel: Kernel, versors: np.ndarray, x_blades: np.ndarray):
        """Row-major M(V): column c is the sandwich of V with the c-th blade of X."""
        rows_type = self.module.type(kernel.rows)
        out, outside = [], []
        for v in versors:
            cols = [self._value(kernel, "sandwich", [v, x]) for x in x_blades]
            comps, rest = self._split(rows_type, cols)
            out.append(comps.T.reshape(-1))
            outside.append(rest.max(initial=0.0))
        return np.array(out), np.array(outside)


def random_inputs(module: Module, kernel: Kernel, samples: int, seed: int) -> list[np.ndarray]:
    rng = np.random.default_rng([seed, len(kernel.name)] + [ord(ch) for ch in kernel.name])
    args = kernel.args[:len(kernel.arg_names)]      # sandwich_matrix takes only the versor
    return [rng.uniform(-1.0, 1.0, (samples, len(module.type(t).components))) for t in args]


def verify(module: Module, out_dir: Path, samples: int = SAMPLES, seed: int = SEED) -> list[Row]:
    oracle = Oracle(module)
    runners = []
    for target in module.targets:
        if target in RUNNERS:
            runners.extend(RUNNERS[target](module, out_dir))
    rows = []
    for kernel in module.kernels:
        inputs = random_inputs(module, kernel, samples, seed)
        try:
            expected, outside = oracle.evaluate(kernel, inputs)
        except TooLarge as error:
            rows.append(Row(kernel.name, "reference", samples, math.nan, math.nan,
                            f"not checked: {error}", checked=False))
            continue
        scale = 1.0 + float(np.max(np.abs(expected), initial=0.0))
        for target, run, rel, *about in runners:
            got = run(kernel, [x.copy() for x in inputs])
            if got is None:         # the runner does not apply (a sandwich-only path)
                continue
            got = np.asarray(got, dtype=float)
            err = float(np.max(np.abs(got - expected), initial=0.0))
            err = max(err, float(np.max(outside, initial=0.0)))
            tol = (rel(kernel, inputs) if callable(rel) else rel) * scale * _terms(kernel)
            note = "; ".join([x for x in about[:1] if x] + ([] if err <= tol else ["mismatch"]))
            rows.append(Row(kernel.name, target, samples, err, tol, note))
    return rows


def _terms(kernel: Kernel) -> int:
    return max([len(f.terms) for f in kernel.formulas] + [1])
