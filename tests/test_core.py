"""Core pipeline: spec -> algebra -> derivation -> Python target -> manifest, checked for meaning.

Derived kernels are compared with the independent dense reference (generator/reference.py, itself
checked against outside sources in test_reference.py), on the example specs and on random
signatures and types drawn by hypothesis.
"""
from __future__ import annotations

import ast
import itertools
import json
import re

import numpy as np
import pytest
import sympy
from hypothesis import HealthCheck, given, settings, strategies as st

from generator import pipeline, spec as spec_mod, verify
from generator.algebra import Algebra, reorder_sign
from generator.manifest import formula_text

from helpers import SPECS, build_python, from_dict, kernel, write_spec


# --- facts of the trade, on derived kernels (not on the reference) ------------------------

CL3 = """
[algebra]
name = "cl3"
basis = ["e1", "e2", "e3"]
metric = [1, 1, 1]
[types.full]
grades = [0, 1, 2, 3]
[[kernels]]
op = "geometric"
args = ["full", "full"]
name = "gp"
[targets.python]
"""


@pytest.fixture(scope="module")
def cl3(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("cl3")
    return build_python(write_spec(tmp, CL3), tmp / "out")


def blade(module, name):
    return from_dict(module, "full", {name: 1.0})


@pytest.mark.parametrize("x, y, expected, sign", [
    # Cl(3,0) facts of the trade (common practice, no source): x y = sign * expected
    ("e1", "e12", "e2", 1), ("e2", "e12", "e1", -1), ("e3", "e12", "e123", 1),
    ("e12", "e1", "e2", -1), ("e12", "e2", "e1", 1), ("e12", "e3", "e123", 1),
    ("e12", "e12", "s", -1),
])
def test_trade_facts_on_derived_product(cl3, x, y, expected, sign):
    module, emitted = cl3
    got = dict(zip([c.ident for c in module.type("full").components],
                   emitted.gp(blade(module, x), blade(module, y))))
    assert got[expected] == sign
    assert all(v == 0 for k, v in got.items() if k != expected)


def test_derived_product_is_associative(cl3):
    # associativity of the geometric product (common practice, no source)
    module, emitted = cl3
    r = np.random.default_rng(1)
    a, b, c = (r.normal(size=8) for _ in range(3))
    left = emitted.gp(emitted.gp(a, b), c)
    right = emitted.gp(a, emitted.gp(b, c))
    assert np.allclose(left, right, atol=1e-12)


def test_reorder_sign_matches_permutation_parity():
    # e_a e_b sign = parity of the swaps that sort the concatenated index list (DFM 2007, ch. 19)
    for a, b in itertools.product(range(16), repeat=2):
        seq = [i for i in range(4) if a >> i & 1] + [i for i in range(4) if b >> i & 1]
        inversions = sum(1 for i in range(len(seq)) for j in range(i + 1, len(seq)) if seq[i] > seq[j])
        assert reorder_sign(a, b) == (-1) ** inversions


def test_preferred_names_fix_orientation():
    alg = Algebra("arm", ("e0", "e1", "e2", "e3"), [[int(i == j) * (i > 0) for j in range(4)]
                                                     for i in range(4)], ("e31", "e021"))
    assert alg.lookup("e31").sign == -1          # e31 = e3 e1 = -e13
    assert alg.lookup("e021").sign == -1         # e021 = e0 e2 e1 = -e012
    assert alg.lookup("e12").sign == 1
    with pytest.raises(ValueError, match="written 'e31'"):
        alg.lookup("e13")


# --- every example spec, python target, against the reference ------------------------------

@pytest.mark.parametrize("path", SPECS, ids=[p.stem for p in SPECS])
def test_example_spec_python_matches_reference(path, tmp_path):
    module, _ = build_python(path, tmp_path)
    rows = verify.verify(module, tmp_path, samples=32)
    assert rows and all(r.ok for r in rows), [r for r in rows if not r.ok]


# --- random signatures and types (hypothesis) -----------------------------------------------

OPS2 = ["geometric", "outer", "left_contraction", "right_contraction", "scalar", "fat_dot",
        "hestenes_inner", "commutator", "add", "sub", "regressive", "sandwich"]
OPS1 = ["reverse", "involute", "conjugate", "complement", "uncomplement"]


@st.composite
def algebras(draw):
    p = draw(st.integers(0, 4))
    q = draw(st.integers(0, 6 - p))
    r = draw(st.integers(0, min(2, 6 - p - q)))
    n = p + q + r
    if n == 0:
        p, n = 1, 1
    metric = [1] * p + [-1] * q + [0] * r
    metric = draw(st.permutations(metric))
    return list(metric)


@st.composite
def typedefs(draw, n):
    grades = draw(st.lists(st.integers(0, n), min_size=1, max_size=3, unique=True))
    return sorted(grades)


def spec_text(metric, types, op, args):
    n = len(metric)
    lines = ['[algebra]', 'name = "rnd"', f'basis = {json.dumps([f"e{i}" for i in range(n)])}',
             f"metric = {json.dumps(metric)}"]
    for i, grades in enumerate(types):
        lines += [f"[types.t{i}]", f"grades = {grades}"]
    lines += ["[[kernels]]", f'op = "{op}"', f"args = {json.dumps(args)}", 'name = "k"',
              "[targets.python]"]
    return "\n".join(lines) + "\n"


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_random_kernels_match_reference(tmp_path_factory, data):
    metric = data.draw(algebras())
    n = len(metric)
    ta, tb = data.draw(typedefs(n)), data.draw(typedefs(n))
    op = data.draw(st.sampled_from(OPS2 + OPS1))
    args = ["t0", "t1"] if op in OPS2 else ["t0"]
    tmp = tmp_path_factory.mktemp("rnd")
    path = write_spec(tmp, spec_text(metric, [ta, tb], op, args))
    try:
        module, _ = build_python(path, tmp / "out")
    except spec_mod.SpecError as exc:
        assert "structurally zero" in str(exc)      # the only refusal for these inputs
        _assert_really_zero(metric, [ta, tb], op, args)
        return
    rows = verify.verify(module, tmp / "out", samples=8)
    assert all(r.ok for r in rows), rows


def _assert_really_zero(metric, types, op, args):
    """The reference agrees that the product of these types vanishes."""
    from generator.reference import Reference
    ref = Reference(metric)
    r = np.random.default_rng(0)
    def rand(grades):
        x = np.zeros(ref.size)
        for bm in range(ref.size):
            if bin(bm).count("1") in grades:
                x[bm] = r.normal()
        return x
    values = [rand(types[int(a[1])]) for a in args]
    assert np.allclose(ref.apply(op, *values), 0, atol=1e-12)


# --- emitted Python: parses, floats, numpy columns, sympy symbols ---------------------------

@pytest.fixture(scope="module")
def arm(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("arm")
    return build_python(next(p for p in SPECS if p.stem == "arm"), tmp), tmp


def test_emitted_python_parses_and_has_banner(arm):
    module, tmp = arm
    text = (tmp / "arm.py").read_text()
    ast.parse(text)
    assert text.startswith("# Generated by bladesmith from ")
    assert "import" not in text.split('"""', 2)[2].split("def ")[0].replace("import math", "")


def test_emitted_python_on_floats_and_columns(arm):
    (module, emitted), _ = arm
    r = np.random.default_rng(3)
    a, b = r.normal(size=(50, 8)), r.normal(size=(50, 8))
    cols = np.array(emitted.compose(a.T, b.T)).T
    for i in range(50):
        assert np.allclose(emitted.compose(list(a[i]), list(b[i])), cols[i], atol=1e-14)


def _symbolic(text: str) -> sympy.Expr:
    return sympy.sympify(re.sub(r"\b([ab])\.(\w+)", r"\1_\2", text))


@pytest.mark.parametrize("name", ["compose", "move_point", "join", "meet_line_plane"])
def test_symbolic_run_equals_manifest(arm, name):
    (module, emitted), tmp = arm
    manifest = json.loads((tmp / "arm.manifest.json").read_text())
    entry = next(k for k in manifest["kernels"] if k["name"] == name)
    k = kernel(module, name)
    args = [[sympy.Symbol(f"{an}_{f}") for f in fields] for an, fields in zip(k.arg_names, k.arg_fields)]
    out = getattr(emitted, name)(*args)
    for comp, value in zip(entry["formulas"], out):
        diff = sympy.expand(sympy.nsimplify(value) - _symbolic(entry["formulas"][comp]))
        assert diff == 0, (name, comp, diff)


def test_build_twice_is_byte_identical(tmp_path):
    path = next(p for p in SPECS if p.stem == "arm")
    first = pipeline.render(pipeline.derive_module(spec_mod.load(path)))
    second = pipeline.render(pipeline.derive_module(spec_mod.load(path)))
    assert first == second


def test_manifest_formula_text_roundtrip(arm):
    # the canonical text parses back to the same polynomial in a sympy sparse ring over QQ
    from generator.derive import to_ring
    (module, _), _ = arm
    for k in module.kernels:
        if any(fm.text is not None for fm in k.formulas):
            continue
        ring, polys = to_ring(k)
        for fm in k.formulas:
            assert ring.from_expr(_symbolic(formula_text(fm))) == polys[fm.comp], (k.name, fm.comp)


def test_derivation_cost_follows_declared_types():
    # a vector product in 15 dimensions touches 15*15 blade pairs, not 2^15 * 2^15
    from generator import derive, model
    from generator.spec import parse
    from pathlib import Path
    n = 15
    text = spec_text([1] * n, [[1], [1]], "geometric", ["t0", "t1"])
    s = parse(text, Path("x.toml"), "x.toml", "0")
    m = model.build(s)
    stats = derive.PairStats()
    variables = derive.Variables([("a", m.types["t0"]), ("b", m.types["t1"])])
    derive.apply(m.algebra, derive.CATALOGUE["geometric"], variables.mvs, stats)
    assert stats.pairs == n * n


@pytest.mark.parametrize("path", SPECS, ids=[p.stem for p in SPECS])
def test_fast_counts_equal_tree_counts(path):
    # the optimizer counts forms from the terms; the trees it emits must count the same
    from generator.optimize import FORM_COUNTS, FORMS, count
    module = pipeline.derive_module(spec_mod.load(path))
    for k in module.kernels:
        for fm in k.formulas:
            if fm.text is None:
                for name, build in FORMS.items():
                    assert FORM_COUNTS[name](fm) == count(build(fm)), (k.name, fm.comp, name)
