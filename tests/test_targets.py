"""The numba and C targets (issue 3): every example kernel in every target, checked for meaning.

Emitted kernels are compared with the independent dense reference through `generator.verify`
(the reference itself is checked against outside sources in test_reference.py): the C header
through a compiled ctypes wrapper around each `_n` loop, the numba module through its scalar
functions and its `_batch` functions, with broadcasting and `out=`.  Beside that, the rotor
kernels are checked against numpy-quaternion and against Python's complex numbers, and the
runtime helpers of `ir.Call` against mpmath (sympy's arbitrary-precision library).

Compilers: gcc/g++ (and clang where installed). Outside CI a missing gcc skips the C tests; with
CI set they fail instead, so CI cannot pass without running them.  numba is a dependency of the
project and is never skipped.
"""
from __future__ import annotations

import ast
import cmath
import inspect
import math
import os
import shutil
import subprocess
import sys
import tracemalloc
from dataclasses import replace
from fractions import Fraction
from pathlib import Path

import mpmath
import numpy as np
import pytest
import quaternion
from click.testing import CliRunner

from generator import native, pipeline, spec as spec_mod, verify
from generator.cli import main
from generator.emit import emitter
from generator.files import write_files
from generator.optimize import count
from generator.ir import (Assignment, Call, Component, Counts, Div, Kernel, Module, Num, Prod,
                          Program, Sum, TypeDef, Var)

from helpers import ROOT, write_spec

SPECS = sorted((ROOT / "specs").glob("*.toml"))
IN_CI = os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")
ALL = {"python": {}, "numba": {}, "c": {}}
NUMBA_LABELS = {"numba", "numba batch", "numba broadcast", "numba out="}
SANDWICH_LABELS = {"numba one versor", "c fixed_n"}     # only sandwich kernels have these paths
C99 = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
CXX17 = ["-x", "c++", "-std=c++17", "-Wall", "-Wextra", "-Werror"]
# beyond the required flags: float builds must not promote to double or narrow silently
FLOAT_EXTRA = ["-Wdouble-promotion", "-Wfloat-conversion"]


def need(tool: str, optional: bool = False) -> str:
    """The tool's path; a missing one skips the test, except in CI, where it fails."""
    found = shutil.which(tool)
    if found:
        return found
    if IN_CI and not optional:
        pytest.fail(f"{tool} is required in CI (CI={os.environ.get('CI')!r}) but not on PATH")
    pytest.skip(f"{tool} is not installed")


def build(path: Path, out: Path, targets: dict) -> Module:
    """Derive a spec and write the given targets into `out` (never into generated/)."""
    module = replace(pipeline.derive_module(spec_mod.load(path)), targets=targets)
    write_files(out, pipeline.render(module))
    return module


def compile_c(cmd: list[str], source: Path, out: Path, *libs: str) -> None:
    done = subprocess.run([*cmd, str(source), "-o", str(out), *libs], capture_output=True, text=True)
    assert done.returncode == 0, f"{' '.join(cmd)} failed:\n{done.stderr}"


# --- every example spec, every kernel, every target, against the reference ---------------------

@pytest.fixture(scope="module", params=SPECS, ids=[p.stem for p in SPECS])
def example(request, tmp_path_factory):
    """(spec path, module IR, output directory) with all three targets built, C in double."""
    out = tmp_path_factory.mktemp(request.param.stem)
    return request.param, build(request.param, out, ALL), out


def test_every_kernel_in_every_target_matches_reference(example):
    _, module, out = example
    targets = dict(ALL) if shutil.which("gcc") or IN_CI else {"python": {}, "numba": {}}
    rows = verify.verify(replace(module, targets=targets), out, samples=32)
    assert all(r.ok for r in rows), [r for r in rows if not r.ok]
    for k in module.kernels:
        labels = {r.target for r in rows if r.kernel == k.name}
        c_labels = {"c", "c fixed_n"} if "c" in targets else set()
        want = {"python"} | NUMBA_LABELS | c_labels | SANDWICH_LABELS
        assert labels == want - (set() if k.op == "sandwich" else SANDWICH_LABELS), (k.name, labels)
    if "c" not in targets:
        need("gcc")         # reported as a skip: the C part did not run


def test_verify_writes_nothing_into_the_output_directory(example):
    _, module, out = example
    before = sorted(p.name for p in out.iterdir())
    verify.verify(module, out, samples=4)
    assert sorted(p.name for p in out.iterdir()) == before    # no __pycache__, no .so, no .c


def test_float_header_matches_reference_with_float32_tolerance(example, tmp_path):
    path, _, _ = example
    need("gcc")
    module = build(path, tmp_path, {"c": {"real": "float"}})
    rows = verify.verify(module, tmp_path, samples=32)
    assert all(r.ok for r in rows), [r for r in rows if not r.ok]
    sandwiches = {k.name for k in module.kernels if k.op == "sandwich"}
    assert {r.target for r in rows} == {"c (float)"} | ({"c (float) fixed_n"} if sandwiches else set())
    assert {r.kernel for r in rows if r.target == "c (float) fixed_n"} == sandwiches
    assert all("eps32" in r.note for r in rows)
    # really float32: float's 24-bit significand cannot reproduce the double result (IEEE 754)
    assert max(r.max_error for r in rows) > 1e-9


def test_header_compiled_as_cxx_matches_reference(example):
    _, module, out = example
    need("g++")
    lib = native.compile_library(module, out, language="c++")
    oracle = verify.Oracle(module)
    for k in module.kernels:
        inputs = verify.random_inputs(module, k, 16, 11)
        expected, _ = oracle.evaluate(k, inputs)
        assert np.allclose(lib.run(k, inputs), expected, rtol=1e-12, atol=1e-12), k.name


def _wrapper_file(module: Module, directory: Path) -> Path:
    """A translation unit that calls every `_n` loop (so every inline function is compiled)."""
    src = directory / f"use_{module.name}.c"
    src.write_text(native.wrapper_source(module))
    return src


def test_header_compiles_without_warnings(example, tmp_path):
    _, module, out = example
    src = _wrapper_file(module, tmp_path)
    obj = tmp_path / "use.o"
    for opt in ("-O0", "-O2"):          # -O2 runs the flow analyses behind -Wmaybe-uninitialized
        compile_c([need("gcc"), *C99, opt, "-I", str(out), "-c"], src, obj)
        compile_c([need("g++"), *CXX17, opt, "-I", str(out), "-c"], src, obj)
        compile_c([need("gcc"), *C99, *FLOAT_EXTRA, opt, f"-D{module.name}_REAL=float", "-I",
                   str(out), "-c"], src, obj)
    for clang, flags in (("clang", C99), ("clang++", CXX17)):
        if shutil.which(clang):
            compile_c([clang, *flags, "-O2", "-I", str(out), "-c"], src, obj)


def test_header_uses_only_stddef_and_math(example):
    _, module, out = example
    text = (out / f"{module.name}.h").read_text()
    includes = [line.strip() for line in text.splitlines() if line.startswith("#include")]
    assert set(includes) <= {"#include <stddef.h>", "#include <math.h>"}
    assert ("#include <math.h>" in includes) == ("sqrt(" in text or "cos(" in text)
    assert "malloc" not in text and "printf" not in text


def test_numba_kernels_are_cached_njit_functions(example):
    _, module, out = example
    tree = ast.parse((out / f"{module.name}_numba.py").read_text())
    decorated = {f.name: f.decorator_list for f in tree.body if isinstance(f, ast.FunctionDef)}
    for k in module.kernels:
        (dec,) = decorated[k.name]
        assert dec.func.id == "njit" and any(
            kw.arg == "cache" and kw.value.value is True for kw in dec.keywords), k.name
        assert decorated[f"{k.name}_batch"] == []       # plain Python: it checks, then loops



def test_numba_loops_go_through_inbounds_load_and_store(example):
    # emit/numba.py: in every loop body a row is read with `_load` and written with `_store`
    # (no subscript, which would keep LLVM from vectorizing long rows), first row to last
    _, module, out = example
    text = (out / f"{module.name}_numba.py").read_text()
    tree = ast.parse(text)
    loops = [f for f in tree.body if isinstance(f, ast.FunctionDef)
             and (f.name.endswith("_each") or "_one_" in f.name)]
    assert loops
    for fn in loops:
        (loop,) = [s for s in fn.body if isinstance(s, ast.For)]
        assert ast.unparse(loop.iter) == "range(n)", fn.name
        assert not any(isinstance(n, ast.Subscript) for n in ast.walk(loop)), fn.name
        calls = [n.func.id for n in ast.walk(loop) if isinstance(n, ast.Call)
                 and isinstance(n.func, ast.Name) and n.func.id in ("_load", "_store")]
        assert "_load" in calls and "_store" in calls, fn.name
    assert "inbounds=True" in text


def test_python_and_numba_results_are_floats_for_float_inputs(example):
    # README: every component of a result is a float, also a constant one (up()'s eo = 1.0) and a
    # structural zero of a declared result type (a sandwich matrix's last row) - never an int
    _, module, out = example
    py = verify.load_python(out / f"{module.name}.py", f"{module.name}_floats")
    nb = native.load_numba(out / f"{module.name}_numba.py")
    width = {t.name: len(t.components) for t in module.types}
    g = np.random.default_rng(3)
    for k in module.kernels:
        args = [tuple(float(v) for v in g.uniform(0.5, 1.0, width[t])) for t in py.KERNELS[k.name][0]]
        for target, fn in (("python", getattr(py, k.name)), ("numba", getattr(nb, k.name))):
            got = fn(*args)
            assert all(type(v) is float for v in got), (k.name, target, [type(v) for v in got])


def test_batch_may_write_over_an_argument(example):
    # each row is read whole before it is written, so out=a (or out=b) gives the rows of a fresh out
    _, module, out = example
    nb = native.load_numba(out / f"{module.name}_numba.py")
    width = {t.name: len(t.components) for t in module.types}
    g = np.random.default_rng(31)
    checked = 0
    for k in module.kernels:
        batch = getattr(nb, f"{k.name}_batch")
        types = nb.KERNELS[k.name][0]          # what the batch takes (a sandwich matrix: a only)
        args = [g.uniform(-1, 1, (257, width[t])) for t in types]
        fresh = batch(*args)
        for at in (at for at, t in enumerate(types) if width[t] == width[k.result]):
            given = [x.copy() for x in args]
            assert batch(*given, out=given[at]) is given[at]
            assert np.array_equal(given[at], fresh), (k.name, at)
            checked += 1
    assert checked, module.name


# --- outside checks: numpy-quaternion and complex numbers ---------------------------------------

ATTITUDE = """
# test scenario: attitude estimator of a toy quadcopter
[algebra]
name = "attitude"
basis = ["e1", "e2", "e3"]
metric = [1, 1, 1]
[types.rotor]
grades = [0, 2]
[types.rate]
grades = [2]
[[kernels]]
op = "geometric"
args = ["rotor", "rotor"]
name = "compose"
result = "rotor"
[[kernels]]
op = "exp"
args = ["rate"]
name = "spin"
result = "rotor"
[[kernels]]
op = "inverse"
args = ["rotor"]
name = "undo"
"""

# the same type and kernel names in another algebra: the prefixes must keep them apart
PLANAR = ATTITUDE.replace('"attitude"', '"planar_toy"').replace(
    '["e1", "e2", "e3"]', '["e1", "e2"]').replace("[1, 1, 1]", "[1, 1]").replace(
    "toy quadcopter", "planar physics toy")


@pytest.fixture(scope="module")
def attitude(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("attitude")
    module = build(write_spec(tmp, ATTITUDE), tmp / "out", ALL)
    py = verify.load_python(tmp / "out" / "attitude.py", "attitude_py")
    nb = native.load_numba(tmp / "out" / "attitude_numba.py")
    return module, tmp / "out", py, nb


def to_quat(r: np.ndarray) -> np.ndarray:
    """Rotor (s, e12, e13, e23) -> quaternion (w, x, y, z) = (s, -e23, e13, -e12).

    Hamilton (1843): i^2 = j^2 = k^2 = ijk = -1. With e_ij = e_i e_j in Cl(3,0), i = -e23,
    j = e13, k = -e12 satisfy them (hand derivation: (-e23)(e13) = -e2 e3 e1 e3 = e2 e1 = -e12 = k)."""
    return quaternion.as_quat_array(np.stack([r[:, 0], -r[:, 3], r[:, 2], -r[:, 1]], axis=1))


def from_quat(q) -> np.ndarray:
    f = quaternion.as_float_array(q)
    return np.stack([f[:, 0], -f[:, 3], f[:, 2], -f[:, 1]], axis=1)


def attitude_runs(module, out, py, nb):
    """kernel name -> {target label: f(*inputs) -> (N, k)} for python, numba and C."""
    lib = native.compile_library(module, out)
    by_name = {k.name: k for k in module.kernels}
    rows = lambda fn: lambda *xs: np.array([fn(*(tuple(map(float, x[i])) for x in xs))
                                            for i in range(len(xs[0]))])
    return {name: {"python": rows(getattr(py, name)), "numba": rows(getattr(nb, name)),
                   "numba batch": getattr(nb, f"{name}_batch"),
                   "c": lambda *xs, k=by_name[name]: lib.run(k, list(xs))} for name in by_name}


def test_rotor_kernels_match_numpy_quaternion_in_every_target(attitude):
    module, out, py, nb = attitude
    need("gcc")
    g = np.random.default_rng(3)
    a, b = g.uniform(-1, 1, (40, 4)), g.uniform(-1, 1, (40, 4))
    rate = g.uniform(-2, 2, (40, 3))
    rate[:4] *= 1e-4                                        # near 0: the series branch of exp
    # numpy-quaternion: Hamilton product, exp of a pure quaternion, multiplicative inverse
    want = {"compose": from_quat(to_quat(a) * to_quat(b)),
            "spin": from_quat(np.exp(to_quat(np.concatenate([np.zeros((40, 1)), rate], 1)))),
            "undo": from_quat(1 / to_quat(a))}
    args = {"compose": (a, b), "spin": (rate,), "undo": (a,)}
    for name, runs in attitude_runs(module, out, py, nb).items():
        for label, run in runs.items():
            assert np.allclose(run(*args[name]), want[name], rtol=1e-12, atol=1e-12), (name, label)


TWO_HEADERS = r"""
#include <stdio.h>
#include "attitude.h"
#include "planar_toy.h"
#include "attitude.h"

int main(void)
{
    attitude_rotor a = {0.5, 0.1, -0.7, 0.3}, b = {-0.2, 0.4, 0.6, -0.9};
    attitude_rate w = {0.3, -0.2, 0.5};
    planar_toy_rotor p = {0.8, -0.6}, q = {0.3, 0.4};
    planar_toy_rate u = {1.25};
    attitude_rotor ab = attitude_compose(a, b), ew = attitude_spin(w), ia = attitude_undo(a);
    planar_toy_rotor pq = planar_toy_compose(p, q), eu = planar_toy_spin(u), ip = planar_toy_undo(p);
    printf("%.17g %.17g %.17g %.17g\n", ab.s, ab.e12, ab.e13, ab.e23);
    printf("%.17g %.17g %.17g %.17g\n", ew.s, ew.e12, ew.e13, ew.e23);
    printf("%.17g %.17g %.17g %.17g\n", ia.s, ia.e12, ia.e13, ia.e23);
    printf("%.17g %.17g %.17g %.17g %.17g %.17g\n", pq.s, pq.e12, eu.s, eu.e12, ip.s, ip.e12);
    return 0;
}
"""


def test_two_headers_in_one_translation_unit(tmp_path):
    for text in (ATTITUDE, PLANAR):
        build(write_spec(tmp_path, text, "spec.toml"), tmp_path, {"c": {}})
    src = tmp_path / "both.c"
    src.write_text(TWO_HEADERS)
    runs = [([need("gcc"), *C99], "c"), ([need("g++"), *CXX17], "cxx")]
    runs += [([tool, *flags], tool) for tool, flags in (("clang", C99), ("clang++", CXX17))
             if shutil.which(tool)]
    for cmd, tag in runs:
        exe = tmp_path / f"both_{tag}"
        compile_c([*cmd, "-I", str(tmp_path)], src, exe, "-lm")
        lines = subprocess.run([str(exe)], capture_output=True, text=True, check=True).stdout.split("\n")
        got = [np.array([float(x) for x in line.split()]) for line in lines[:4]]
        a, b = np.array([[0.5, 0.1, -0.7, 0.3]]), np.array([[-0.2, 0.4, 0.6, -0.9]])
        w = to_quat(np.array([[0.0, 0.3, -0.2, 0.5]]))     # the pure quaternion of rate w
        # numpy-quaternion for Cl(3,0)'s rotors (mapping: to_quat)
        assert np.allclose(got[0], from_quat(to_quat(a) * to_quat(b))[0], rtol=1e-14), tag
        assert np.allclose(got[1], from_quat(np.exp(w))[0], rtol=1e-14), tag
        assert np.allclose(got[2], from_quat(1 / to_quat(a))[0], rtol=1e-14), tag
        # the even part of Cl(2,0) is the complex numbers, e12 -> i (e12^2 = -1; common practice,
        # no source): Python's complex arithmetic and cmath
        p, q = complex(0.8, -0.6), complex(0.3, 0.4)
        want = [p * q, cmath.exp(1.25j), 1 / p]
        assert np.allclose(got[3], [v for z in want for v in (z.real, z.imag)], rtol=1e-14), tag


# --- numba batch behaviour ----------------------------------------------------------------------

def test_batch_broadcasts_one_element_like_repeating_it(attitude):
    _, _, _, nb = attitude
    g = np.random.default_rng(5)
    a, b = g.uniform(-1, 1, (33, 4)), g.uniform(-1, 1, (33, 4))
    for one in (a[7], a[7:8]):
        assert np.array_equal(nb.compose_batch(one, b), nb.compose_batch(np.repeat(a[7:8], 33, 0), b))
        assert np.array_equal(nb.compose_batch(b, one), nb.compose_batch(b, np.repeat(a[7:8], 33, 0)))
    assert nb.compose_batch(a[0], b[0]).shape == (1, 4)
    assert nb.compose_batch(a[:0], b[0]).shape == (0, 4)
    assert np.array_equal(nb.undo_batch(a[3]), nb.undo_batch(a[3:4]))


def test_batch_fills_out_without_allocating(attitude):
    _, _, _, nb = attitude
    g = np.random.default_rng(6)
    a, b = g.uniform(-1, 1, (200_000, 4)), g.uniform(-1, 1, (200_000, 4))
    out = np.full_like(a, np.nan)
    inplace = a.copy()                                      # out may be an input: each row is
    nb.compose_batch(inplace, b, out=inplace)               # read before it is written
    assert np.array_equal(inplace, nb.compose_batch(a, b))
    nb.compose_batch(a, b[5], out=out)                      # both loops compiled and warm
    nb.compose_batch(a, b, out=out)
    want = nb.compose_batch(a, b)
    tracemalloc.start()
    got = nb.compose_batch(a, b[5], out=out)
    got = nb.compose_batch(a, b, out=out)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert got is out and np.array_equal(out, want)
    assert peak < out.nbytes // 100, peak                   # numpy reports its buffers to tracemalloc


def test_batch_dtype_follows_the_inputs(attitude):
    _, _, _, nb = attitude
    g = np.random.default_rng(8)
    a, b = g.uniform(-1, 1, (50, 4)), g.uniform(-1, 1, (50, 4))
    a32, b32 = a.astype(np.float32), b.astype(np.float32)
    exact = nb.compose_batch(a32.astype(np.float64), b32.astype(np.float64))
    single = nb.compose_batch(a32, b32)
    assert single.dtype == np.float32
    # 4 products summed: within a few float32 ulps of the exact result (IEEE 754 rounding)
    assert np.allclose(single, exact, rtol=0, atol=16 * np.finfo(np.float32).eps)
    assert nb.compose_batch(a32, b).dtype == np.float64
    assert nb.compose_batch(a, b32[0]).dtype == np.float64
    assert nb.spin_batch(g.uniform(-1, 1, (5, 3)).astype(np.float32)).dtype == np.float32
    out32 = np.empty((50, 4), np.float32)
    assert nb.compose_batch(a32, b32, out=out32) is out32


@pytest.mark.parametrize("call, words", [
    (lambda nb: nb.compose_batch(np.zeros((5, 4)), np.zeros((5, 3))), ["'b'", "(N, 4)", "(5, 3)"]),
    (lambda nb: nb.compose_batch(np.zeros((5, 4), int), np.zeros((5, 4))), ["'a'", "int64"]),
    (lambda nb: nb.compose_batch([[1.0, 0, 0, 0]], np.zeros((1, 4))), ["'a'", "list"]),
    (lambda nb: nb.compose_batch(np.zeros((4, 5)).T, np.zeros((5, 4))), ["'a'", "not C-contiguous"]),
    (lambda nb: nb.compose_batch(np.zeros((5, 4)), np.zeros((3, 4))), ["5 rows", "3"]),
    (lambda nb: nb.compose_batch(np.zeros((5, 4)), np.zeros((5, 4)), out=np.zeros((5, 3))),
     ["'out'", "(5, 4)"]),
    (lambda nb: nb.compose_batch(np.zeros((5, 4)), np.zeros((5, 4)),
                                 out=np.zeros((5, 4), np.float32)), ["'out'", "float64"]),
    (lambda nb: nb.undo_batch(np.zeros((2, 3, 4))), ["'a'", "(N, 4)", "(2, 3, 4)"]),
])
def test_batch_rejects_bad_arguments_clearly(attitude, call, words):
    _, _, _, nb = attitude
    with pytest.raises(ValueError) as info:
        call(nb)
    assert all(w in str(info.value) for w in words), str(info.value)


def test_unary_batch_has_no_b_and_scalar_calls_take_any_sequence(attitude):
    _, _, py, nb = attitude
    assert list(inspect.signature(nb.undo_batch).parameters) == ["a", "out"]
    assert list(inspect.signature(nb.compose_batch).parameters) == ["a", "b", "out"]
    r = (0.5, 0.1, -0.7, 0.3)
    want = py.undo(r)
    for seq in (r, np.array(r)):                # (numba deprecates reflected lists)
        assert np.allclose(nb.undo(seq), want, rtol=1e-15)


# --- hand-made IR: Div, Call and temporaries in every target ------------------------------------

def _comp(ident: str, bitmap: int) -> Component:
    return Component(ident, ident, bitmap, tuple(i for i in range(2) if bitmap >> i & 1), 1)


LONG = [((-1) ** j, Fraction(j, 7)) for j in range(1, 15)]     # 14 terms: wraps over lines
LONG_SUM = sum(sign * c for sign, c in LONG)


def hand_module(fns=("exp_c", "exp_s", "exp_d")) -> Module:
    """Two kernels built by hand: `helpers` calls each helper and sqrt; `ratio` divides and has
    a long temporary (a sum of 14 products) that the printer wraps over several lines."""
    pair = TypeDef("pair", (_comp("s", 0), _comp("e1", 1)))
    quad = TypeDef("quad", (_comp("s", 0), _comp("e1", 1), _comp("e2", 2), _comp("e12", 3)))
    x, y = Var("a_s"), Var("a_e1")
    calls = [Assignment(c, Call(fn, (x,))) for c, fn in zip(("s", "e1", "e2"), fns)]
    calls.append(Assignment("e12", Call("sqrt", (Sum(((1, Prod((y, y))), (1, Num(Fraction(1))))),))))
    helpers = Kernel("helpers", "hand", ("pair",), "quad", (), arg_names=("a",), summary="helpers",
                     program=Program((), tuple(calls), Counts(), "hand"))
    long = Sum(tuple((sign, Prod((Num(c), Var("a_s"), Var("b_s")))) for sign, c in LONG))
    temps = (Assignment("t0", long), Assignment("t1", Div(Num(Fraction(1)), Var("t0"))))
    outs = (Assignment("s", Div(Var("a_s"), Var("b_e1"))), Assignment("e1", Prod((Var("t1"), y))))
    ratio = Kernel("ratio", "hand", ("pair", "pair"), "pair", (), summary="ratio",
                   program=Program(temps, outs, Counts(), "hand"))
    # reads nothing of b and pads a zero: C must silence -Wunused-parameter itself
    first = Kernel("first", "hand", ("pair", "pair"), "pair", (), summary="first",
                   program=Program((), (Assignment("s", x), Assignment("e1", Num(Fraction(0)))),
                                   Counts(), "hand"))
    return Module("handmade", "tests/test_targets.py (hand-made IR)", "", ("e1", "e2"),
                  ((Fraction(1), Fraction(0)), (Fraction(0), Fraction(1))), (pair, quad),
                  (helpers, ratio, first), dict(ALL))


def mp_helpers(v: float) -> tuple[float, float, float]:
    """exp_c, exp_s, exp_d at v with mpmath at 50 digits (the definitions in generator/ir.py)."""
    with mpmath.workdps(50):
        x = mpmath.mpf(v)
        if x == 0:      # limits, from the series: 1, 1, 1/2! - 1/3! = 1/3
            return 1.0, 1.0, 1.0 / 3.0
        t = mpmath.sqrt(abs(x))
        c, s = (mpmath.cos(t), mpmath.sin(t) / t) if x < 0 else (mpmath.cosh(t), mpmath.sinh(t) / t)
        return float(c), float(s), float((c - s) / x)


# both sides of 0, inside and outside the series' |x| < 1e-2, and far out
XS = [-9.0, -2.5, -0.3, -0.0100001, -0.0099, -1e-3, -1e-9, 0.0, 1e-9, 1e-3, 0.0099, 0.0100001,
      0.3, 2.5, 9.0]


def hand_expected(x: np.ndarray, a: np.ndarray, b: np.ndarray):
    """helpers(x) and ratio(a, b), from mpmath and from the formulas written out above."""
    helpers = np.array([[*mp_helpers(s), math.sqrt(e * e + 1)] for s, e in x])
    t0 = float(LONG_SUM) * a[:, 0] * b[:, 0]
    return helpers, np.stack([a[:, 0] / b[:, 1], a[:, 1] / t0], axis=1)


# exp_d just outside |x| < 1e-2 is (c - s)/x with c - s ~ x/3: cancellation costs about
# eps / (1e-2 / 3) ~ 7e-14 relative (error analysis of the difference; common practice, no source)
HELPER_RTOL = 1e-12


@pytest.fixture(scope="module")
def hand(tmp_path_factory):
    out = tmp_path_factory.mktemp("hand")
    module = hand_module()
    write_files(out, {name: text for t in ALL for name, text in emitter(t, {}).files(module).items()})
    g = np.random.default_rng(9)
    x = np.stack([XS, g.uniform(-3, 3, len(XS))], axis=1)
    a, b = (g.uniform(0.5, 2, (len(XS), 2)) * g.choice([-1, 1], (len(XS), 2)) for _ in range(2))
    return module, out, (x, a, b)


def test_hand_module_python_target(hand):
    module, out, (x, a, b) = hand
    text = (out / "handmade.py").read_text()
    assert "import math" in text and "    t0 = (\n" in text       # the long temp spans lines
    py = verify.load_python(out / "handmade.py", "hand_py")
    want_h, want_r = hand_expected(x, a, b)
    assert np.allclose([py.helpers(tuple(r)) for r in x], want_h, rtol=HELPER_RTOL, atol=0)
    got_r = [py.ratio(tuple(r), tuple(s)) for r, s in zip(a, b)]
    assert np.allclose(got_r, want_r, rtol=1e-13, atol=0)


def test_hand_module_numba_target(hand):
    module, out, (x, a, b) = hand
    nb = native.load_numba(out / "handmade_numba.py")
    want_h, want_r = hand_expected(x, a, b)
    assert np.allclose([nb.helpers(r) for r in x], want_h, rtol=HELPER_RTOL, atol=0)
    assert np.allclose(nb.helpers_batch(x), want_h, rtol=HELPER_RTOL, atol=0)
    assert np.allclose(nb.ratio_batch(a, b), want_r, rtol=1e-13, atol=0)
    assert np.allclose(nb.ratio_batch(a[2], b)[2], want_r[2], rtol=1e-13, atol=0)
    x32 = x.astype(np.float32)
    got32 = nb.helpers_batch(x32)
    assert got32.dtype == np.float32
    assert np.allclose(got32, hand_expected(x32.astype(float), a, b)[0], rtol=1e-6, atol=0)


@pytest.mark.parametrize("real, rtol", [("double", 1e-13), ("float", 1e-6)])
def test_hand_module_c_target(hand, real, rtol):
    module, out, (x, a, b) = hand
    need("gcc")
    lib = native.compile_library(module, out, real=real)
    assert lib.dtype == (np.float32 if real == "float" else np.float64)
    # inputs rounded to the build's type first, so the check measures the kernel, not the input
    x, a, b = (v.astype(lib.dtype).astype(float) for v in (x, a, b))
    want_h, want_r = hand_expected(x, a, b)
    assert np.allclose(lib.run(module.kernels[0], [x]), want_h, rtol=max(rtol, HELPER_RTOL), atol=0)
    # float: the 14-term sum cancels to -1 from terms up to 2 (14 roundings of ~2 eps32 each)
    assert np.allclose(lib.run(module.kernels[1], [a, b]), want_r, rtol=rtol * 10, atol=0)
    assert np.array_equal(lib.run(module.kernels[2], [a, b]), np.stack([a[:, 0], 0 * a[:, 0]], 1))
    src = _wrapper_file(module, out.parent)
    extra = FLOAT_EXTRA if real == "float" else []
    compile_c([need("gcc"), *C99, *extra, "-O2", f"-Dhandmade_REAL={real}", "-I", str(out), "-c"],
              src, out.parent / "hand.o")
    compile_c([need("g++"), *CXX17, "-O2", "-I", str(out), "-c"], src, out.parent / "hand.o")


def test_helpers_and_math_only_when_used(tmp_path):
    only_s = replace(hand_module(), kernels=(hand_module(("exp_s",) * 3).kernels[0],))
    plain = replace(hand_module(), kernels=(hand_module().kernels[1],))
    for module, fns in ((only_s, {"exp_s", "sqrt"}), (plain, set())):
        files = {t: emitter(t, {}).files(module) for t in ALL}
        py, nb, h = files["python"]["handmade.py"], files["numba"]["handmade_numba.py"], \
            files["c"]["handmade.h"]
        for name in ("exp_c", "exp_s", "exp_d"):
            assert (f"def _{name}(" in py) == (f"def _{name}(" in nb) == (name in fns)
            assert (f"handmade_{name}(handmade_real v)" in h) == (name in fns)
        assert ("import math" in py) == ("import math" in nb) == ("#include <math.h>" in h) == bool(fns)
        assert ("handmade_sqrt(handmade_real x)" in h) == ("sqrt" in fns)


# --- names, errors, determinism ----------------------------------------------------------------

CLASH = """
[algebra]
name = "clash"
basis = ["e1", "e2"]
metric = [1, 1]
[types.rotor]
grades = [0, 2]
[[kernels]]
op = "geometric"
args = ["rotor", "rotor"]
name = "turn"
[[kernels]]
op = "reverse"
args = ["rotor"]
name = "{second}"
[targets.{target}]
"""


@pytest.mark.parametrize("target, second, emitted", [
    ("c", "turn_n", "clash_turn_n"), ("numba", "turn_batch", "turn_batch"),
    ("c", "rotor", "clash_rotor")])
def test_clashing_emitted_names_are_a_spec_error(tmp_path, target, second, emitted):
    path = write_spec(tmp_path, CLASH.format(second=second, target=target))
    result = CliRunner().invoke(main, ["build", str(path), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2, result.output
    assert "Error:" in result.output and repr(emitted) in result.output, result.output
    assert "Traceback" not in result.output and not (tmp_path / "out").exists()


def test_missing_compiler_is_a_clear_error(monkeypatch):
    monkeypatch.delenv("CC", raising=False)
    monkeypatch.setenv("PATH", "")
    with pytest.raises(native.NativeError, match="no c compiler found"):
        native.compiler()


def test_numba_and_c_output_is_byte_identical_across_hash_seeds(tmp_path):
    path = write_spec(tmp_path, ATTITUDE)         # no [targets]: all three
    outs = []
    for seed in ("1", "2"):
        out = tmp_path / seed
        env = dict(os.environ, PYTHONHASHSEED=seed)
        subprocess.run([sys.executable, "-c", "from generator.cli import main; main()", "build",
                        str(path), "--out", str(out), "-q"], check=True, env=env, cwd=ROOT)
        outs.append({p.name: p.read_bytes() for p in out.iterdir()})
    assert outs[0] == outs[1]
    assert {p for p in outs[0] if p.endswith(("_numba.py", ".h"))}


# --- one versor on many elements (issue 4 item 3) -----------------------------------------------

@pytest.fixture(scope="module")
def one_versor(tmp_path_factory):
    """{spec stem: (module IR, Python target, numba target, C library or None)} for drone and arm."""
    built = {}
    for stem in ("drone", "arm"):
        out = tmp_path_factory.mktemp(f"one_{stem}")
        module = build(ROOT / "specs" / f"{stem}.toml", out, ALL)
        lib = native.compile_library(module, out) if shutil.which("gcc") else None
        built[stem] = (module, verify.load_python(out / f"{stem}.py", f"one_{stem}"),
                       native.load_numba(out / f"{stem}_numba.py"), lib)
    return built


def fixed_n(lib, kernel, a, b):
    """NAME_<kernel>_fixed_n(a, n, b, out) through the verification wrapper (a by pointer)."""
    out = np.full((len(b), len(lib.module.type(kernel.result).components)), np.nan)
    a, b = np.ascontiguousarray(a, float), np.ascontiguousarray(b, float)
    lib.function(kernel, "fixed_")(len(b), a.ctypes.data, b.ctypes.data, out.ctypes.data)
    return out


def one_versor_runs(built, stem, name):
    """label -> f(one versor (k,), elements (N, k)) -> (N, k), for every one-versor path."""
    module, _, nb, lib = built[stem]
    batch = getattr(nb, f"{name}_batch")
    runs = {"numba (k,)": batch, "numba (1, k)": lambda v, x: batch(v[None, :], x),
            "numba out=": lambda v, x: batch(v, x, out=np.empty_like(x)),
            "numba in place": lambda v, x: _in_place(batch, v, x)}
    if lib is not None or IN_CI:
        need("gcc")
        runs["c fixed_n"] = lambda v, x: fixed_n(lib, kernel(module, name), v, x)
    return runs


def _in_place(batch, v, x):
    y = x.copy()
    assert batch(v, y, out=y) is y          # each row is read before it is written
    return y


def kernel(module, name):
    return next(k for k in module.kernels if k.name == name)


def scipy_quat_to_rotor(q: np.ndarray) -> np.ndarray:
    """scipy's (x, y, z, w) -> rotor (s, e12, e13, e23), the inverse of `to_quat` above.

    Vectors: e23 = I e1, e13 = -I e2, e12 = I e3 with I = e123 (hand derivation, e.g.
    e123 e2 = -e13), so i, j, k = -I e1, -I e2, -I e3; -I commutes with everything in Cl(3,0),
    hence R v ~R corresponds to q v q* for the vector part x i + y j + z k."""
    x, y, z, w = q.T
    return np.stack([w, -z, y, -x], axis=1)


def test_one_rotor_on_many_vectors_matches_scipy(one_versor):
    # scipy.spatial.transform.Rotation: Hamilton quaternions, active rotation q v q* (Rodrigues)
    from scipy.spatial.transform import Rotation
    g = np.random.default_rng(21)
    rotations = Rotation.random(4, random_state=22)
    vectors = g.normal(size=(257, 3))             # odd N: vectorized loops and their remainder
    for q, rot in zip(rotations.as_quat(), rotations):
        rotor = scipy_quat_to_rotor(q[None, :])[0]
        for label, run in one_versor_runs(one_versor, "drone", "rotate").items():
            assert np.allclose(run(rotor, vectors), rot.apply(vectors), rtol=0, atol=1e-12), label
            # not normalized: (c R) v (c ~R) = c^2 R v ~R, linearity of the product (from memory)
            assert np.allclose(run(2.5 * rotor, vectors), 6.25 * rot.apply(vectors), atol=1e-11), label


def test_one_motor_on_many_points_matches_homogeneous_matrix(one_versor):
    # 4x4 homogeneous matrices with scipy's rotation matrix (standard graphics texts); motors and
    # points are built as in test_versor.py, which checks those constructions on their own
    from test_versor import euclid, homogeneous, motor, point
    module, py, _, _ = one_versor["arm"]
    g = np.random.default_rng(23)
    xs = g.normal(size=(129, 3))
    points = np.array([point((module, py), x) for x in xs])
    for _ in range(3):
        rotvec, t = g.normal(size=3), g.normal(size=3)
        V = np.array(motor((module, py), rotvec, t))
        want = (homogeneous(rotvec, t) @ np.hstack([xs, np.ones((len(xs), 1))]).T).T[:, :3]
        for label, run in one_versor_runs(one_versor, "arm", "move_point").items():
            got = np.array([euclid(module, p) for p in run(V, points)])
            assert np.allclose(got, want, rtol=0, atol=1e-12), label


def test_one_versor_paths_agree_with_the_reference_for_every_sandwich(one_versor):
    # the dense reference (test_reference.py checks it against outside sources)
    for stem, (module, _, _, lib) in one_versor.items():
        oracle = verify.Oracle(module)
        for k in (k for k in module.kernels if k.op == "sandwich"):
            a, b = verify.random_inputs(module, k, 40, 31)
            a[:] = a[7]                                     # one versor for every row
            expected, outside = oracle.evaluate(k, [a, b])
            assert np.max(outside) < 1e-12
            for label, run in one_versor_runs(one_versor, stem, k.name).items():
                assert np.allclose(run(a[7], b), expected, rtol=1e-12, atol=1e-12), (k.name, label)


def test_one_versor_loops_compute_the_matrix_before_the_loop(example):
    # the structure issue 4 asks for, read from the emitted text: every temporary of
    # Kernel.one_to_many is assigned before the loop, and the loop body costs only the outputs
    _, module, out = example
    tree = ast.parse((out / f"{module.name}_numba.py").read_text())
    functions = {f.name: f for f in tree.body if isinstance(f, ast.FunctionDef)}
    header = (out / f"{module.name}.h").read_text()
    for k in (k for k in module.kernels if k.op == "sandwich"):
        temps = {t.target for t in k.one_to_many.temps}
        fn = functions[f"_{k.name}_one_a"]
        (loop,) = [s for s in fn.body if isinstance(s, ast.For)]
        before = {t.id for s in fn.body[:fn.body.index(loop)] if isinstance(s, ast.Assign)
                  for t in s.targets if isinstance(t, ast.Name)}
        inside = {n.id for n in ast.walk(loop) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Store)}
        assert temps <= before and not temps & inside, k.name
        stores = [s.value.args[2] for s in loop.body if isinstance(s, ast.Expr)
                  and s.value.func.id == "_store"]
        multiplies = sum(isinstance(n, ast.BinOp) and isinstance(n.op, ast.Mult)
                         for value in stores for n in ast.walk(value))
        assert multiplies == sum(count(o.expr).mul for o in k.one_to_many.outputs), k.name
        body = header[header.index(f"void {module.name}_{k.name}_fixed_n("):]
        body = body[:body.index("\n}\n")]
        loop_at = body.index("for (i = 0; i < n; ++i)")
        assert all(0 <= body.find(f" {t} = ") < loop_at for t in temps), k.name
        assert not any(f" {t} = " in body[loop_at:] for t in temps), k.name


def test_one_versor_batch_allocates_nothing_with_out(one_versor):
    _, _, nb, _ = one_versor["drone"]
    g = np.random.default_rng(24)
    R, v = g.uniform(-1, 1, 4), g.uniform(-1, 1, (200_000, 3))
    out = np.empty_like(v)
    nb.rotate_batch(R, v, out=out)                          # compiled and warm
    tracemalloc.start()
    got = nb.rotate_batch(R, v, out=out)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert got is out and peak < out.nbytes // 100, peak    # numpy reports its buffers to tracemalloc
