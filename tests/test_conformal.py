"""Non-orthogonal metrics (issue 5): the conformal model in a null basis, and random metrics.

Conformal facts from Dorst, Fontijne & Mann, *Geometric Algebra for Computer Science* (2007),
ch. 13: up-projected points are null; X.Y = -1/2 |x - y|^2; the translation versor
T = 1 - t ei / 2 moves up(x) to up(x + t) (the sign as in that chapter, from memory); a dual
sphere normalized to eo-coefficient 1 is up(c) - r^2/2 ei.  The sphere through four points is
also found with numpy.linalg.solve from |p - c|^2 = r^2.
"""
from __future__ import annotations

import json
import re
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from generator import spec as spec_mod, verify
from generator.metric import congruence, determinant
from generator.reference import Reference

from helpers import ROOT, as_dict, build_python, from_dict, write_spec

RAY = ROOT / "specs" / "raytrace.toml"


@pytest.fixture(scope="module")
def ray(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("ray")
    return build_python(RAY, tmp), tmp


def up(ray, x):
    (module, e), _ = ray
    return e.up(from_dict(module, "euclid", {"e1": x[0], "e2": x[1], "e3": x[2]}))


def test_up_projected_points_are_null(ray):
    (module, e), _ = ray
    for x in np.random.default_rng(1).normal(size=(20, 3)):
        P = up(ray, x)
        assert abs(e.inner(P, P)[0]) < 1e-12


def test_inner_product_is_minus_half_squared_distance(ray):
    (module, e), _ = ray
    r = np.random.default_rng(2)
    for x, y in zip(r.normal(size=(20, 3)), r.normal(size=(20, 3))):
        assert np.isclose(e.inner(up(ray, x), up(ray, y))[0], -0.5 * np.sum((x - y) ** 2))


def test_translation_versor_moves_points(ray):
    (module, e), _ = ray
    r = np.random.default_rng(3)
    for x, t in zip(r.normal(size=(20, 3)), r.normal(size=(20, 3))):
        gen = from_dict(module, "shift", {"e1i": -t[0] / 2, "e2i": -t[1] / 2, "e3i": -t[2] / 2})
        T = e.translator_from(gen)
        assert np.allclose(T, [1, -t[0] / 2, -t[1] / 2, -t[2] / 2])      # exp of a null bivector
        assert np.allclose(e.translate(T, up(ray, x)), up(ray, x + t), atol=1e-12)


def test_sphere_through_four_points(ray):
    (module, e), _ = ray
    r = np.random.default_rng(4)
    for _ in range(10):
        pts = r.normal(size=(4, 3))
        P = [up(ray, p) for p in pts]
        S = e.sphere_of(e.circle_of(e.pair_of(P[0], P[1]), P[2]), P[3])
        for p in P:
            assert np.allclose(e.on_sphere(S, p), 0, atol=1e-10)
        sigma = as_dict(module, "point", e.dual_sphere(S))
        sigma = {k: v / sigma["eo"] for k, v in sigma.items()}
        centre = np.array([sigma["e1"], sigma["e2"], sigma["e3"]])
        # |p - c|^2 = r^2  <=>  2 p.c + (r^2 - |c|^2) = |p|^2 : linear in (c, r^2 - |c|^2)
        A = np.hstack([2 * pts, np.ones((4, 1))])
        sol = np.linalg.solve(A, np.sum(pts ** 2, axis=1))
        assert np.allclose(centre, sol[:3], atol=1e-8)
        radius2 = sol[3] + np.sum(sol[:3] ** 2)
        assert np.isclose(-2 * (sigma["ei"] - 0.5 * np.sum(centre ** 2)), radius2, atol=1e-8)
        assert np.isclose(float(np.real(e.inner(list(sigma.values()), list(sigma.values()))[0])),
                          radius2, atol=1e-8)


def test_rotor_rotates_conformal_points(ray):
    (module, e), _ = ray
    from scipy.spatial.transform import Rotation    # Rodrigues' formula
    rotvec, x = np.array([0.2, -0.5, 0.9]), np.array([1.0, 2.0, -0.5])
    half = -0.5 * rotvec
    R = e.rotor_from(from_dict(module, "turn", {"e23": half[0], "e13": -half[1], "e12": half[2]}))
    assert np.allclose(e.rotate(R, up(ray, x)), up(ray, Rotation.from_rotvec(rotvec).apply(x)))


def test_formulas_are_exact_rationals(ray):
    (module, _), tmp = ray
    manifest = json.loads((tmp / "raytrace.manifest.json").read_text())
    for k in manifest["kernels"]:
        for text in k["formulas"].values():
            numbers = re.findall(r"(?<![\w.])\d+(?:\.\d+)?(?:e-?\d+)?", text)
            assert all(re.fullmatch(r"\d+", n) for n in numbers), text
            assert "sqrt" not in text


# --- the reference with a null metric against an orthonormal one ----------------------------

def test_reference_null_basis_against_orthonormal():
    # eo = (e- - e+)/2, ei = e- + e+ with e+^2 = 1, e-^2 = -1 gives eo^2 = ei^2 = 0, eo.ei = -1
    # (hand-checked: (1/4)(-1 + 1) = 0, -1 + 1 = 0, (1/2)(-1 - 1) = -1)
    null = [[1, 0, 0], [0, 0, -1], [0, -1, 0]]               # e1, eo, ei
    ortho = Reference([1, 1, -1])                             # e1, e+, e-
    ref = Reference(null)
    f = {0: ortho.vector(0), 1: (ortho.vector(2) - ortho.vector(1)) / 2,
         2: ortho.vector(2) + ortho.vector(1)}
    def image(x):
        """The outermorphism: a null-basis multivector in the orthonormal algebra."""
        out = ortho.zero()
        for bm in range(8):
            if x[bm]:
                b = ortho.scalar(1.0)
                for k in range(3):
                    if bm >> k & 1:
                        b = ortho.outer(b, f[k])
                out = out + x[bm] * b
        return out
    r = np.random.default_rng(5)
    for _ in range(20):
        x, y = r.normal(size=8), r.normal(size=8)
        assert np.allclose(image(ref.geometric(x, y)), ortho.geometric(image(x), image(y)))


def test_congruence_diagonalizes_exactly():
    g = [[Fraction(v) for v in row] for row in [[1, 0, 0, 0, 0], [0, 1, 0, 0, 0], [0, 0, 1, 0, 0],
                                                [0, 0, 0, 0, -1], [0, 0, 0, -1, 0]]]
    p, d = congruence(g)
    n = len(g)
    ptgp = [[sum(p[k][i] * g[k][l] * p[l][j] for k in range(n) for l in range(n)) for j in range(n)]
            for i in range(n)]
    assert all(ptgp[i][j] == (d[i] if i == j else 0) for i in range(n) for j in range(n))
    assert determinant(p) != 0
    assert sorted(x > 0 for x in d) == [False, True, True, True, True]   # signature (4, 1)


# --- random rational symmetric metrics (hypothesis) ----------------------------------------

@st.composite
def metrics(draw):
    n = draw(st.integers(1, 4))
    entries = st.fractions(min_value=-3, max_value=3, max_denominator=3)
    g = [[Fraction(0)] * n for _ in range(n)]
    for i in range(n):
        for j in range(i, n):
            g[i][j] = g[j][i] = draw(entries) if draw(st.booleans()) else Fraction(0)
    return g


OPS = ["geometric", "outer", "left_contraction", "fat_dot", "commutator", "regressive",
       "sandwich", "reverse", "complement"]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_random_metrics_match_reference(tmp_path_factory, data):
    g = data.draw(metrics())
    n = len(g)
    grades = [sorted(data.draw(st.lists(st.integers(0, n), min_size=1, max_size=2, unique=True)))
              for _ in range(2)]
    op = data.draw(st.sampled_from(OPS))
    args = '["t0"]' if op in ("reverse", "complement") else '["t0", "t1"]'
    metric = "[" + ", ".join("[" + ", ".join(f'"{x}"' for x in row) + "]" for row in g) + "]"
    basis = json.dumps([f"e{i}" for i in range(n)])
    text = (f'[algebra]\nname = "rnd"\nbasis = {basis}\nmetric = {metric}\n'
            f"[types.t0]\ngrades = {grades[0]}\n[types.t1]\ngrades = {grades[1]}\n"
            f'[[kernels]]\nop = "{op}"\nargs = {args}\nname = "k"\n[targets.python]\n')
    tmp = tmp_path_factory.mktemp("m")
    try:
        module, _ = build_python(write_spec(tmp, text), tmp / "out")
    except spec_mod.SpecError as exc:
        assert "structurally zero" in str(exc), str(exc)
        return
    rows = verify.verify(module, tmp / "out", samples=6)
    assert all(r.ok for r in rows), rows
