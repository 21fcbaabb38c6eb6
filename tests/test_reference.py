"""Checks of the dense reference (generator/reference.py) against sources outside the project.

Every check names its source in a comment beside it (DESIGN section 7).  Facts that are common
practice with no particular source are marked "(common practice, no source)"; facts recalled
without a source at hand are marked "(from memory)".  No expected value here was copied from the
reference's own output: expected values come from an outside package (numpy-quaternion, sympy,
scipy, Python's complex arithmetic), from a published rule, or from a hand derivation written out
in the comment beside it.

Notation: e1, e2, e3, ... in comments are the basis vectors 0, 1, 2, ... of the reference, and
e12 = f0 ^ f1 etc.
"""

import cmath
import itertools
import math
import pathlib
import sys
from fractions import Fraction

import numpy as np
import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from generator.reference import Reference  # noqa: E402

ATOL = 1e-9


# ----------------------------------------------------------------------------- helpers
def rand_float(R, rng, scale=1.0):
    return rng.standard_normal(R.size) * scale


def rand_exact(R, rng, lo=-4, hi=5):
    out = np.empty(R.size, dtype=object)
    for k, v in enumerate(rng.integers(lo, hi, R.size).tolist()):
        out[k] = Fraction(v)
    return out


def rand(R, rng):
    return rand_exact(R, rng) if R.exact else rand_float(R, rng)


def assert_mv_equal(R, X, Y):
    if R.exact:
        assert list(X) == list(Y), f"{list(X)} != {list(Y)}"
    else:
        np.testing.assert_allclose(np.asarray(X, float), np.asarray(Y, float), atol=ATOL, rtol=1e-9)


def bitmap(factors):
    b = 0
    for i in factors:
        b |= 1 << i
    return b


def combine(R, pairs):
    """sum of coefficient * multivector."""
    out = R.zero()
    for c, X in pairs:
        out = out + X * c
    return out


def coefficients_in(R, X, basis):
    """Coordinates of X in the span of the given multivectors (asserts X lies in that span)."""
    B = np.array([np.asarray(b, float) for b in basis]).T
    x = np.asarray(X, float)
    coef, *_ = np.linalg.lstsq(B, x, rcond=None)
    np.testing.assert_allclose(B @ coef, x, atol=ATOL)
    return coef


def matrix_rep(R, X, gens):
    """Image of X under the representation e_i -> gens[i] (orthogonal basis, so the wedge blade
    e_A equals the geometric product of its factors in ascending order; common practice, no
    source)."""
    dim = gens[0].shape[0]
    out = np.zeros((dim, dim), dtype=complex)
    for a in range(R.size):
        m = np.eye(dim, dtype=complex)
        for i in range(R.n):
            if (a >> i) & 1:
                m = m @ gens[i]
        out = out + complex(X[a]) * m
    return out


METRICS_DIAGONAL = [[1, 1, 1], [1, -1, -1, -1], [-1, 2, Fraction(1, 3)]]
METRICS_DEGENERATE = [[0, 1, 1, 1], [1, 0, -1, 0], [0, 0, 0]]
METRICS_NONORTH = [
    [[1, 2, 0, 0], [2, 0, 1, 0], [0, 1, -1, 3], [0, 0, 3, 2]],
    [[0, 1, 0], [1, 0, 0], [0, 0, 1]],              # a hyperbolic pair (zero diagonal) and e3
    [[2, 1, 1], [1, 2, 1], [1, 1, 2]],
    [[1, 1, 0], [1, 1, 0], [0, 0, 1]],              # degenerate and non-orthogonal (det 0)
]
ALL_METRICS = METRICS_DIAGONAL + METRICS_DEGENERATE + METRICS_NONORTH


def metric_matrix(metric):
    """The Gram matrix as floats, built here independently of the reference."""
    if all(not isinstance(r, (list, tuple)) for r in metric):
        return np.diag([float(x) for x in metric])
    return np.array([[float(x) for x in r] for r in metric])


# ----------------------------------------------------------------------------- quaternions
def quaternion_units(R):
    # Identification (documented choice): i = e3 e2 = -e23, j = e1 e3 = -e31, k = e2 e1 = -e12.
    # (With i = e23, j = e31, k = e12 one gets ijk = +1, so the minus signs are needed.)
    return R.blade((2, 1)), R.blade((0, 2)), R.blade((1, 0))


def test_hamilton_rules_on_even_subalgebra_of_cl3():
    R = Reference([1, 1, 1], dtype=object)
    i, j, k = quaternion_units(R)
    minus_one = R.scalar(-1)
    # Hamilton (1843): i^2 = j^2 = k^2 = ijk = -1
    assert_mv_equal(R, R.geometric(i, i), minus_one)
    assert_mv_equal(R, R.geometric(j, j), minus_one)
    assert_mv_equal(R, R.geometric(k, k), minus_one)
    assert_mv_equal(R, R.geometric(R.geometric(i, j), k), minus_one)
    # consequences of Hamilton's rules (Hamilton, 1843): ij = k = -ji
    assert_mv_equal(R, R.geometric(i, j), k)
    assert_mv_equal(R, R.geometric(j, i), -k)


def test_even_products_agree_with_numpy_quaternion():
    quaternion = pytest.importorskip("quaternion")
    R = Reference([1, 1, 1])
    i, j, k = quaternion_units(R)
    basis = [R.scalar(1), i, j, k]
    rng = np.random.default_rng(1843)
    for _ in range(20):
        p, q = rng.standard_normal(4), rng.standard_normal(4)
        P = combine(R, zip(p, basis))
        Q = combine(R, zip(q, basis))
        got = coefficients_in(R, R.geometric(P, Q), basis)
        # numpy-quaternion package: np.quaternion(w, x, y, z) with Hamilton's product
        want = quaternion.as_float_array(np.quaternion(*p) * np.quaternion(*q))
        np.testing.assert_allclose(got, want, atol=ATOL)
        # numpy-quaternion: conjugate() corresponds to reverse on the even subalgebra
        got_c = coefficients_in(R, R.reverse(P), basis)
        np.testing.assert_allclose(got_c, quaternion.as_float_array(np.quaternion(*p).conjugate()),
                                   atol=ATOL)


def test_vector_sandwich_agrees_with_numpy_quaternion_rotation():
    quaternion = pytest.importorskip("quaternion")
    R = Reference([1, 1, 1])
    i, j, k = quaternion_units(R)
    basis = [R.scalar(1), i, j, k]
    vectors = [R.vector(0), R.vector(1), R.vector(2)]
    rng = np.random.default_rng(7)
    for _ in range(10):
        q = rng.standard_normal(4)
        q /= np.linalg.norm(q)
        v = rng.standard_normal(3)
        V = combine(R, zip(v, vectors))
        out = R.sandwich(combine(R, zip(q, basis)), V)
        # Hand derivation: i = -I e1 etc., so the vector v corresponds to the pure quaternion of
        # -I v; I is central, hence R v ~R  <->  q (v as pure quaternion) q*, which is
        # numpy-quaternion's rotate_vectors (numpy-quaternion package docs).
        want = quaternion.rotate_vectors(np.quaternion(*q), v)
        got = coefficients_in(R, out, vectors)
        np.testing.assert_allclose(got, want, atol=ATOL)


def test_rotor_sandwich_agrees_with_scipy_rotation():
    Rotation = pytest.importorskip("scipy.spatial.transform").Rotation
    R = Reference([1, 1, 1])
    vectors = [R.vector(0), R.vector(1), R.vector(2)]
    I = R.blade((0, 1, 2))
    rng = np.random.default_rng(11)
    for _ in range(10):
        axis = rng.standard_normal(3)
        axis /= np.linalg.norm(axis)
        theta = rng.uniform(-3, 3)
        v = rng.standard_normal(3)
        # Rotor exp(-theta/2 * n I) rotates by theta about n, right-handed (from memory; checked
        # by hand for n = e3, theta = 90 degrees: e1 -> e2).
        B = R.geometric(combine(R, zip(axis, vectors)), I) * (-theta / 2)
        rotor = R.exp(B)
        got = coefficients_in(R, R.sandwich(rotor, combine(R, zip(v, vectors))), vectors)
        # scipy.spatial.transform.Rotation.from_rotvec (Rodrigues' formula)
        want = Rotation.from_rotvec(theta * axis).apply(v)
        np.testing.assert_allclose(got, want, atol=ATOL)


# ----------------------------------------------------------------------------- matrix representations
def test_pauli_matrices_represent_cl3():
    from sympy.physics.matrices import msigma
    # Pauli matrices from sympy.physics.matrices.msigma (Pauli, 1927; year from memory)
    gens = [np.array(msigma(i).evalf(), dtype=complex) for i in (1, 2, 3)]
    R = Reference([1, 1, 1])
    rng = np.random.default_rng(1927)
    for _ in range(20):
        A, B = rand_float(R, rng), rand_float(R, rng)
        np.testing.assert_allclose(matrix_rep(R, R.geometric(A, B), gens),
                                   matrix_rep(R, A, gens) @ matrix_rep(R, B, gens), atol=ATOL)
    # the representation is faithful: Cl(3,0) has real dimension 8 = real dimension of 2x2 complex
    # matrices (common practice, no source); a non-zero element must not map to zero
    A = rand_float(R, rng)
    assert np.abs(matrix_rep(R, A, gens)).max() > 1e-6


def test_dirac_matrices_represent_cl13():
    from sympy.physics.matrices import mgamma
    # Dirac matrices from sympy.physics.matrices.mgamma (Dirac, 1928; year from memory); metric diag(1, -1, -1, -1)
    gens = [np.array(mgamma(mu).evalf(), dtype=complex) for mu in range(4)]
    R = Reference([1, -1, -1, -1])
    rng = np.random.default_rng(1928)
    for _ in range(20):
        A, B = rand_float(R, rng), rand_float(R, rng)
        np.testing.assert_allclose(matrix_rep(R, R.geometric(A, B), gens),
                                   matrix_rep(R, A, gens) @ matrix_rep(R, B, gens), atol=ATOL)


# ----------------------------------------------------------------------------- low-dimensional algebras
def test_complex_numbers_as_cl01():
    R = Reference([-1])
    rng = np.random.default_rng(2)
    for _ in range(20):
        a, b, c, d = rng.standard_normal(4)
        X, Y = np.array([a, b]), np.array([c, d])
        # Python complex arithmetic (the language reference): e0 <-> 1j
        z = complex(a, b) * complex(c, d)
        assert_mv_equal(R, R.geometric(X, Y), [z.real, z.imag])
        w = 1 / complex(a, b)
        assert_mv_equal(R, R.inverse(X), [w.real, w.imag])
        e = cmath.exp(complex(a, b))  # Python's cmath.exp
        assert_mv_equal(R, R.exp(X), [e.real, e.imag])


def test_dual_numbers_as_cl001():
    for dtype in (float, object):
        R = Reference([0], dtype=dtype)
        rng = np.random.default_rng(3)
        for _ in range(10):
            a, b, c, d = (Fraction(int(x)) for x in rng.integers(-9, 10, 4))
            X, Y = np.array([a, b], dtype=object), np.array([c, d], dtype=object)
            # dual numbers: (a + b eps)(c + d eps) = ac + (ad + bc) eps (common practice, no source)
            assert_mv_equal(R, R.geometric(X, Y), [a * c, a * d + b * c])
            if a != 0:
                # 1/(a + b eps) = 1/a - (b/a^2) eps (common practice, no source)
                assert_mv_equal(R, R.inverse(X), [1 / a, -b / (a * a)])
            else:
                with pytest.raises(ValueError):
                    R.inverse(X)
        # exp(a + b eps) = e^a (1 + b eps) (common practice, no source)
        R = Reference([0])
        assert_mv_equal(R, R.exp([0.3, -1.7]), [math.exp(0.3), math.exp(0.3) * -1.7])


def test_split_complex_numbers_as_cl10():
    R = Reference([1], dtype=object)
    rng = np.random.default_rng(4)
    for _ in range(10):
        a, b, c, d = (Fraction(int(x)) for x in rng.integers(-9, 10, 4))
        # split-complex numbers, j^2 = +1: (a + bj)(c + dj) = (ac + bd) + (ad + bc) j
        # (common practice, no source)
        assert_mv_equal(R, R.geometric([a, b], [c, d]), [a * c + b * d, a * d + b * c])
    # exp(t j) = cosh t + j sinh t (common practice, no source)
    Rf = Reference([1])
    assert_mv_equal(Rf, Rf.exp([0.0, 0.8]), [math.cosh(0.8), math.sinh(0.8)])
    # (1 + j)(1 - j) = 1 - j^2 = 0, so 1 + j has no inverse (common practice, no source)
    with pytest.raises(ValueError):
        R.inverse([1, 1])
    with pytest.raises(ValueError):
        Rf.inverse([1.0, 1.0])


# ----------------------------------------------------------------------------- general facts
@pytest.mark.parametrize("p,q", [(p, q) for p in range(7) for q in range(7) if p + q <= 6])
def test_pseudoscalar_square(p, q):
    R = Reference([1] * p + [-1] * q)
    n = p + q
    I = R.blade(range(n))
    # I^2 = (-1)^(n(n-1)/2) (-1)^q for Cl(p,q) (standard textbook result)
    want = (-1) ** (n * (n - 1) // 2) * (-1) ** q
    assert_mv_equal(R, R.geometric(I, I), R.scalar(want))


@pytest.mark.parametrize("n", range(9))
def test_blade_counts_are_binomial(n):
    R = Reference([1] * n)
    assert R.size == 2 ** n
    for k in range(n + 1):
        count = sum(1 for a in range(R.size) if R.grade_of(a) == k)
        assert count == math.comb(n, k)  # C(n, k) (common practice)
        ones = np.ones(R.size)
        assert np.count_nonzero(R.project(ones, [k])) == math.comb(n, k)  # (common practice)


def test_cl3_trade_facts():
    R = Reference([1, 1, 1], dtype=object)
    e1, e2, e3 = R.vector(0), R.vector(1), R.vector(2)
    e12, e123 = R.blade((0, 1)), R.blade((0, 1, 2))
    g = R.geometric
    # (common practice, no source) for all of the following in Cl(3,0):
    assert_mv_equal(R, g(e1, e12), e2)
    assert_mv_equal(R, g(e2, e12), -e1)
    assert_mv_equal(R, g(e3, e12), e123)
    assert_mv_equal(R, g(e12, e1), -e2)
    assert_mv_equal(R, g(e12, e2), e1)
    assert_mv_equal(R, g(e12, e3), e123)
    assert_mv_equal(R, g(e12, e12), R.scalar(-1))
    # e1 e2 = e12 for orthogonal vectors, and e2 e1 = -e12 (common practice, no source)
    assert_mv_equal(R, g(e1, e2), e12)
    assert_mv_equal(R, g(e2, e1), -e12)


def test_blade_order_and_wedge_of_vectors():
    # swapping two factors of a wedge product flips its sign (common practice, no source)
    for metric in (METRICS_NONORTH[0], [1, 1, 1, 1]):
        R = Reference(metric, dtype=object)
        assert_mv_equal(R, R.blade((0, 2, 1)), -R.blade((0, 1, 2)))
        assert_mv_equal(R, R.blade((3, 1)), -R.blade((1, 3)))
        assert_mv_equal(R, R.blade((1, 1)), R.zero())
        # blade() (built from the wedge operators only) agrees with outer() (built from the
        # geometric product and grade selection) in a non-orthogonal metric too
        for factors in itertools.permutations(range(R.n), 3):
            x = R.scalar(1)
            for i in factors:
                x = R.outer(x, R.vector(i))
            assert_mv_equal(R, R.blade(factors), x)


@pytest.mark.parametrize("metric", ALL_METRICS)
def test_associativity_exact(metric):
    R = Reference(metric, dtype=object)
    rng = np.random.default_rng(5)
    for _ in range(3):
        A, B, C = rand(R, rng), rand(R, rng), rand(R, rng)
        # the geometric product is associative (common practice, no source)
        assert_mv_equal(R, R.geometric(R.geometric(A, B), C), R.geometric(A, R.geometric(B, C)))


@pytest.mark.parametrize("metric", [[1, -1, 1, 1, -1], [0, 1, 1, 1, 1],
                                    [[1, 2, 0, 0, 1], [2, 0, 1, 0, 0], [0, 1, -1, 3, 0],
                                     [0, 0, 3, 2, 1], [1, 0, 0, 1, 0]]])
def test_associativity_float(metric):
    R = Reference(metric)
    rng = np.random.default_rng(6)
    for _ in range(5):
        A, B, C = rand(R, rng), rand(R, rng), rand(R, rng)
        # the geometric product is associative (common practice, no source)
        assert_mv_equal(R, R.geometric(R.geometric(A, B), C), R.geometric(A, R.geometric(B, C)))


@pytest.mark.parametrize("metric", METRICS_DIAGONAL + METRICS_DEGENERATE)
def test_orthogonal_vectors_anticommute(metric):
    R = Reference(metric, dtype=object)
    for i, j in itertools.combinations(range(R.n), 2):
        # orthogonal vectors anticommute (common practice, no source)
        assert_mv_equal(R, R.geometric(R.vector(i), R.vector(j)),
                        -R.geometric(R.vector(j), R.vector(i)))
    for i in range(R.n):
        # e_i^2 = metric entry (common practice, no source)
        assert_mv_equal(R, R.geometric(R.vector(i), R.vector(i)), R.scalar(metric[i]))


@pytest.mark.parametrize("metric", ALL_METRICS)
def test_vector_anticommutator_is_twice_the_bilinear_form(metric):
    R = Reference(metric)
    Gm = metric_matrix(metric)
    rng = np.random.default_rng(8)
    for _ in range(10):
        u, v = rng.standard_normal(R.n), rng.standard_normal(R.n)
        U = combine(R, ((u[i], R.vector(i)) for i in range(R.n)))
        V = combine(R, ((v[i], R.vector(i)) for i in range(R.n)))
        # u v + v u = 2 G(u, v): the defining relation of a Clifford algebra (common practice,
        # no source); G(u, v) = u^T G v computed here with numpy
        assert_mv_equal(R, R.geometric(U, V) + R.geometric(V, U), R.scalar(2 * u @ Gm @ v))
        # u ^ v = (uv - vu)/2 (common practice, no source)
        assert_mv_equal(R, R.outer(U, V), (R.geometric(U, V) - R.geometric(V, U)) / 2)
        # u . v = G(u, v) for vectors, for every inner product of DESIGN section 3
        # (Dorst, The Inner Products of Geometric Algebra, 2002)
        for op in ("left_contraction", "right_contraction", "scalar_product", "fat_dot",
                   "hestenes_inner"):
            assert_mv_equal(R, getattr(R, op)(U, V), R.scalar(u @ Gm @ v))


# ----------------------------------------------------------------------------- non-orthogonal metrics
def outermorphism(R_d, P):
    """Matrix of the outermorphism of f_i -> g_i = sum_j P[j, i] d_j, built with the reference's
    own vector / outer: column A is g_{a_0} ^ g_{a_1} ^ ... (ascending a_k)."""
    n = R_d.n
    g = [combine(R_d, ((P[j][i], R_d.vector(j)) for j in range(n))) for i in range(n)]
    cols = []
    for a in range(R_d.size):
        x = R_d.scalar(1)
        for i in range(n):
            if (a >> i) & 1:
                x = R_d.outer(x, g[i])
        cols.append(x)
    return np.array(cols, dtype=object).T


@pytest.mark.parametrize("P,D", [
    ([[1, 2, 0], [0, 1, -1], [3, 0, 1]], [1, -1, 2]),
    ([[1, 1, 0], [-1, 1, 0], [0, 2, 1]], [0, 1, -1]),                 # degenerate D
    ([[2, 1, 0, 1], [0, 1, 1, 0], [1, 0, 1, 0], [0, 0, 1, 1]], [1, 1, -1, 0]),
])
def test_nonorthogonal_metric_equals_diagonal_after_outermorphism(P, D):
    """G = P^T D P.  The vectors g_i = sum_j P[j, i] d_j of the diagonal algebra have
    g_i . g_k = (P^T D P)_{ik} = G_{ik}, so f_i -> g_i is an isometry and extends to an algebra
    homomorphism that preserves grades (the outermorphism): phi(A op B) = phi(A) op phi(B) for
    every product of DESIGN section 3, and phi commutes with reverse etc. (common practice, no
    source; standard universal property of Clifford algebras, from memory)."""
    n = len(D)
    Pm = [[Fraction(x) for x in row] for row in P]
    G = [[sum(Pm[j][i] * D[j] * Pm[j][k] for j in range(n)) for k in range(n)] for i in range(n)]
    assert any(G[i][k] != 0 for i in range(n) for k in range(n) if i != k)  # really non-orthogonal
    R_g = Reference(G, dtype=object)
    R_d = Reference(D, dtype=object)
    Phi = outermorphism(R_d, Pm)
    phi = lambda X: Phi @ X  # noqa: E731
    rng = np.random.default_rng(9)
    for _ in range(2):
        A, B = rand(R_g, rng), rand(R_g, rng)
        for op in ("geometric", "outer", "left_contraction", "right_contraction", "scalar",
                   "fat_dot", "hestenes_inner", "commutator", "sandwich"):
            assert_mv_equal(R_d, phi(R_g.apply(op, A, B)), R_d.apply(op, phi(A), phi(B)))
        for op in ("reverse", "involute", "conjugate", "norm_squared"):
            assert_mv_equal(R_d, phi(R_g.apply(op, A)), R_d.apply(op, phi(A)))


def test_float_and_exact_tables_agree():
    # internal consistency between the two arithmetics (common practice, no source)
    metric = METRICS_NONORTH[0]
    Rf, Rx = Reference(metric), Reference(metric, dtype=object)
    rng = np.random.default_rng(10)
    A, B = rand_exact(Rx, rng), rand_exact(Rx, rng)
    for op in ("geometric", "outer", "left_contraction", "regressive", "commutator"):
        np.testing.assert_allclose(Rf.apply(op, A.astype(float), B.astype(float)),
                                   Rx.apply(op, A, B).astype(float), atol=ATOL)


# ----------------------------------------------------------------------------- contraction identities
@pytest.mark.parametrize("metric", [METRICS_NONORTH[0], [1, -1, 0, 2]])
def test_contraction_identities(metric):
    R = Reference(metric, dtype=object)
    Gm = [[Fraction(x) for x in r] for r in metric] if isinstance(metric[0], list) else \
        [[Fraction(metric[i]) if i == j else Fraction(0) for j in range(4)] for i in range(4)]
    rng = np.random.default_rng(12)
    vec = lambda c: combine(R, ((Fraction(int(c[i])), R.vector(i)) for i in range(R.n)))  # noqa
    form = lambda x, y: sum(Fraction(int(x[i])) * Gm[i][j] * Fraction(int(y[j]))  # noqa
                            for i in range(R.n) for j in range(R.n))
    for _ in range(3):
        a, b, c = (rng.integers(-3, 4, R.n) for _ in range(3))
        A, B_, C = vec(a), vec(b), vec(c)
        # a _| (b ^ c) = (a.b) c - (a.c) b (Dorst, The Inner Products of Geometric Algebra, 2002;
        # from memory)
        assert_mv_equal(R, R.left_contraction(A, R.outer(B_, C)),
                        C * form(a, b) - B_ * form(a, c))
        # (b ^ c) |_ a = b (c.a) - c (b.a) (Dorst 2002; from memory)
        assert_mv_equal(R, R.right_contraction(R.outer(B_, C), A),
                        B_ * form(c, a) - C * form(b, a))
        X, Y, Z = rand(R, rng), rand(R, rng), rand(R, rng)
        # for a vector a and any X: a _| X = (aX - X^ a)/2 and a ^ X = (aX + X^ a)/2, where X^ is
        # the grade involution (common practice, from memory)
        Xi = R.involute(X)
        assert_mv_equal(R, R.left_contraction(A, X), (R.geometric(A, X) - R.geometric(Xi, A)) / 2)
        assert_mv_equal(R, R.outer(A, X), (R.geometric(A, X) + R.geometric(Xi, A)) / 2)
        # X _| (Y _| Z) = (X ^ Y) _| Z (Dorst 2002; from memory)
        assert_mv_equal(R, R.left_contraction(X, R.left_contraction(Y, Z)),
                        R.left_contraction(R.outer(X, Y), Z))
        # (X |_ Y)~ = Y~ _| X~ (Dorst 2002; from memory)
        rv = R.reverse
        assert_mv_equal(R, rv(R.right_contraction(X, Y)), R.left_contraction(rv(Y), rv(X)))
        # scalar product = grade-0 part of the geometric product (DESIGN section 3)
        assert_mv_equal(R, R.scalar_product(X, Y), R.project(R.geometric(X, Y), [0]))
        # Hestenes inner product ignores scalars; fat dot with a scalar is scalar
        # multiplication (Dorst 2002)
        s = R.scalar(3)
        assert_mv_equal(R, R.hestenes_inner(s, X), R.zero())
        assert_mv_equal(R, R.fat_dot(s, X), X * 3)
        # commutator product (AB - BA)/2 (DESIGN section 3)
        assert_mv_equal(R, R.commutator(X, Y), (R.geometric(X, Y) - R.geometric(Y, X)) / 2)


@pytest.mark.parametrize("metric", [METRICS_NONORTH[2], [1, 0, -1]])
def test_reverse_involution_conjugate_on_vector_products(metric):
    R = Reference(metric, dtype=object)
    rng = np.random.default_rng(13)
    u, v, w = (combine(R, ((Fraction(int(x)), R.vector(i))
                           for i, x in enumerate(rng.integers(-3, 4, R.n)))) for _ in range(3))
    g = R.geometric
    uvw = g(g(u, v), w)
    # reverse reverses the order of vector factors (common practice, no source)
    assert_mv_equal(R, R.reverse(uvw), g(g(w, v), u))
    # grade involution negates every vector factor (common practice, no source)
    assert_mv_equal(R, R.involute(uvw), -uvw)
    # Clifford conjugate = reverse of the involution (common practice, no source)
    assert_mv_equal(R, R.conjugate(uvw), g(g(-w, -v), -u))


def test_reflection_and_norm_in_cl3():
    R = Reference([1, 1, 1])
    rng = np.random.default_rng(14)
    vectors = [R.vector(i) for i in range(3)]
    for _ in range(5):
        n_ = rng.standard_normal(3)
        n_ /= np.linalg.norm(n_)
        v = rng.standard_normal(3)
        N, V = combine(R, zip(n_, vectors)), combine(R, zip(v, vectors))
        # for a unit vector n: n v n = 2 (n.v) n - v (minus the reflection in the plane normal to n;
        # common practice, no source)
        got = coefficients_in(R, R.sandwich(N, V), vectors)
        np.testing.assert_allclose(got, 2 * (n_ @ v) * n_ - v, atol=ATOL)
        # |v|^2 = v ~v (common practice, no source)
        assert_mv_equal(R, R.norm_squared(V), R.scalar(v @ v))


# ----------------------------------------------------------------------------- complement, regressive, dual
@pytest.mark.parametrize("metric", [[1, 1, 1, 1], [0, 1, 1, 1], METRICS_NONORTH[0], [0, 0, 0]])
def test_complement_and_regressive(metric):
    R = Reference(metric, dtype=object)
    I = R.blade(range(R.n))
    rng = np.random.default_rng(15)
    for a in range(R.size):
        e = R.zero()
        e[a] = Fraction(1)
        # e_a ^ comp(e_a) = I (definition of the right complement, DESIGN section 3)
        assert_mv_equal(R, R.outer(e, R.complement(e)), I)
        # comp(e_a) is a multiple of the basis blade e_{~a} (DESIGN section 3)
        c = R.complement(e)
        assert [k for k in range(R.size) if c[k] != 0] == [(R.size - 1) ^ a]
    for _ in range(3):
        X, Y = rand(R, rng), rand(R, rng)
        # the left complement is the inverse map (DESIGN section 3)
        assert_mv_equal(R, R.uncomplement(R.complement(X)), X)
        assert_mv_equal(R, R.complement(R.uncomplement(X)), X)
        # I v X = X (DESIGN section 3; common practice, no source)
        assert_mv_equal(R, R.regressive(I, X), X)
        # the regressive product is metric-free (DESIGN section 3): same result with a Euclidean
        # metric of the same dimension
        R_e = Reference([1] * R.n, dtype=object)
        assert_mv_equal(R, R.regressive(X, Y), R_e.regressive(X, Y))
        # grade(A v B) = r + s - n for blades (common practice, no source)
        for r, s in itertools.product(range(R.n + 1), repeat=2):
            out = R.regressive(R.project(X, [r]), R.project(Y, [s]))
            assert_mv_equal(R, R.project(out, [r + s - R.n]) if r + s >= R.n else R.zero(), out)


def test_regressive_meet_of_coordinate_planes():
    R = Reference([1, 1, 1], dtype=object)
    # Hand derivation from the DESIGN section 3 definition: comp(e12) = e3, comp(e23) = e1,
    # e3 ^ e1 = -e13, and comp(e2) = -e13 (since e2 ^ e13 = -e123), so uncomp(-e13) = e2:
    # e12 v e23 = e2, the line common to the two planes (common practice, no source)
    assert_mv_equal(R, R.regressive(R.blade((0, 1)), R.blade((1, 2))), R.vector(1))


@pytest.mark.parametrize("metric", [[1, 1, 1], [1, -1, -1, -1], METRICS_NONORTH[0],
                                    METRICS_NONORTH[1], [2, Fraction(1, 2)]])
def test_dual_undual(metric):
    R = Reference(metric, dtype=object)
    rng = np.random.default_rng(16)
    for _ in range(3):
        X = rand(R, rng)
        # dual X I^-1 and undual X I are inverse maps (DESIGN section 3)
        assert_mv_equal(R, R.undual(R.dual(X)), X)
        assert_mv_equal(R, R.dual(R.undual(X)), X)


def test_dual_in_cl3():
    R = Reference([1, 1, 1], dtype=object)
    # I^-1 = -I in Cl(3,0) since I^2 = -1; e1 I^-1 = -e1 e1 e2 e3 = -e23 (hand derivation;
    # common practice, no source)
    assert_mv_equal(R, R.dual(R.vector(0)), -R.blade((1, 2)))
    assert_mv_equal(R, R.undual(R.vector(0)), R.blade((1, 2)))


@pytest.mark.parametrize("metric", [[0, 1, 1], [1, 1, 0, 1], [[1, 1], [1, 1]], [0]])
def test_dual_rejects_degenerate_metric(metric):
    for dtype in (float, object):
        R = Reference(metric, dtype=dtype)
        X = R.scalar(1)
        # a degenerate metric has no pseudoscalar inverse (DESIGN section 3)
        with pytest.raises(ValueError):
            R.dual(X)
        with pytest.raises(ValueError):
            R.undual(X)


# ----------------------------------------------------------------------------- inverse, exp
@pytest.mark.parametrize("metric,dtype", [([1, 1, 1], object), ([1, -1, 0], object),
                                          (METRICS_NONORTH[2], object), ([1, -1, 1, 1], float),
                                          (METRICS_NONORTH[0], float)])
def test_inverse(metric, dtype):
    R = Reference(metric, dtype=dtype)
    rng = np.random.default_rng(17)
    one = R.scalar(1)
    for _ in range(3):
        A = rand(R, rng)
        try:
            Ai = R.inverse(A)
        except ValueError:
            continue  # a random element may be singular (e.g. in a degenerate metric)
        # A^-1 A = A A^-1 = 1 (definition of the inverse; common practice, no source)
        assert_mv_equal(R, R.geometric(Ai, A), one)
        assert_mv_equal(R, R.geometric(A, Ai), one)
    # the inverse of a non-null vector is v / (v.v) (common practice, no source)
    v = R.vector(0)
    assert_mv_equal(R, R.inverse(v), v / R.geometric(v, v)[0])


def test_inverse_rejects_singular():
    # e0 with e0^2 = 0 is nilpotent, hence singular; (1 + e1)(1 - e1) = 0 in Cl(1,0)
    # (common practice, no source)
    for dtype in (float, object):
        R = Reference([0, 1], dtype=dtype)
        with pytest.raises(ValueError):
            R.inverse(R.vector(0))
        with pytest.raises(ValueError):
            R.inverse(R.scalar(1) + R.vector(1))
    # in float, 1 + n for a unit vector n in a generic direction is singular only up to rounding
    # ((1 + n)(1 - n) = 1 - n^2 = 0; common practice, no source); it must still be refused
    R = Reference([1, 1, 1])
    rng = np.random.default_rng(19)
    for _ in range(5):
        d = rng.standard_normal(3)
        d /= np.linalg.norm(d)
        N = combine(R, zip(d, [R.vector(i) for i in range(3)]))
        with pytest.raises(ValueError):
            R.inverse(R.scalar(1) + N)


def test_exp_of_euclidean_bivector_is_euler():
    R = Reference([1, 1, 1])
    e12 = R.blade((0, 1))
    for theta in (0.0, 0.3, -1.2, 2.9, 7.0):
        # exp(theta e12) = cos theta + sin theta e12 since e12^2 = -1 (Euler's formula,
        # common practice)
        assert_mv_equal(R, R.exp(e12 * theta), R.scalar(math.cos(theta)) + e12 * math.sin(theta))
        # exp(t e1) = cosh t + sinh t e1 since e1^2 = +1 (common practice, no source)
        e1 = R.vector(0)
        assert_mv_equal(R, R.exp(e1 * theta), R.scalar(math.cosh(theta)) + e1 * math.sinh(theta))


def test_exact_exp_of_non_nilpotent_element_falls_back_to_float():
    R = Reference([1, 1, 1], dtype=object)
    e12 = R.blade((0, 1))
    # exp(theta e12) = cos theta + sin theta e12 (Euler's formula, common practice); the exact
    # tables cannot represent it, so the documented float64 fallback is used
    got = R.exp(e12 * Fraction(1, 3))
    np.testing.assert_allclose(got.astype(float),
                               (R.scalar(math.cos(1 / 3)) + e12 * math.sin(1 / 3)).astype(float),
                               atol=ATOL)


@pytest.mark.parametrize("dtype", [float, object])
def test_exp_of_null_bivector(dtype):
    R = Reference([0, 1, 1, 1], dtype=dtype)
    # e01 e0j = e0 e1 e0 ej = -e0 e0 e1 ej = 0, so B = a e01 + b e02 + c e03 squares to zero and
    # exp(B) = 1 + B (common practice, no source)
    B = R.blade((0, 1)) * 3 + R.blade((0, 2)) * (-2) + R.blade((0, 3)) * Fraction(1, 2)
    if dtype is float:
        B = B.astype(float)
    assert_mv_equal(R, R.exp(B), R.scalar(1) + B)


# ----------------------------------------------------------------------------- API surface
def test_apply_dispatch_and_errors():
    R = Reference([1, -1, 1], dtype=object)
    rng = np.random.default_rng(18)
    A, B = rand(R, rng), rand(R, rng)
    assert_mv_equal(R, R.apply("scalar", A, B), R.scalar_product(A, B))
    assert_mv_equal(R, R.apply("add", A, B), A + B)  # (common practice, no source)
    assert_mv_equal(R, R.apply("sub", A, B), A - B)  # (common practice, no source)
    with pytest.raises(ValueError):
        R.apply("no_such_op", A)
    with pytest.raises(TypeError):
        R.apply("geometric", A)
    with pytest.raises(ValueError):
        Reference([[1, 2], [3, 1]])  # not symmetric
    with pytest.raises(ValueError):
        R.geometric(np.zeros(4), B)  # wrong length
    # left_matrix(A) X = A X
    assert_mv_equal(R, R.left_matrix(A) @ B, R.geometric(A, B))


# ----------------------------------------------------------------------------- the two paths
# float64 products go through the index-array action on the right factor, exact ones through the
# stacked tensor: two constructions of the same Chevalley operators, checked against each other
# here (the outside checks above run on both dtypes)
TWO_PATH_OPS = ["geometric", "outer", "left_contraction", "right_contraction", "scalar",
                "fat_dot", "hestenes_inner", "commutator", "sandwich", "complement",
                "uncomplement", "regressive", "norm_squared"]


@pytest.mark.parametrize("metric", ALL_METRICS)
def test_float_action_equals_exact_tensor(metric):
    exact, fast = Reference(metric, dtype=object), Reference(metric)
    rng = np.random.default_rng(41)
    for _ in range(3):
        A, B = rand_exact(exact, rng), rand_exact(exact, rng)
        Af, Bf = A.astype(float), B.astype(float)
        for op in TWO_PATH_OPS:
            args = (A, B) if exact._OPS[op][1] == 2 else (A,)
            fargs = (Af, Bf) if len(args) == 2 else (Af,)
            want = np.array([float(x) for x in exact.apply(op, *args)])
            assert np.allclose(fast.apply(op, *fargs), want, atol=1e-9), (op, metric)
    for factors in itertools.permutations(range(exact.n), 2):
        assert np.allclose(fast.blade(factors), exact.blade(factors).astype(float))


def test_sixteen_dimensions_without_the_tensor():
    # a spec may have 16 basis vectors (spec.MAX_DIMENSION); the float reference must serve it
    # without 2^48-entry tables.  Facts checked (common practice, no source): v v = v.v for a
    # vector in a diagonal metric; orthogonal vectors anticommute; the product is associative;
    # a vector times a bivector has grades 1 and 3 only.
    metric = [1] * 10 + [-1] * 5 + [0]
    R = Reference(metric)
    rng = np.random.default_rng(16)
    v = R.zero()
    v[[1 << i for i in range(16)]] = rng.uniform(-1, 1, 16)
    vv = R.geometric(v, v)
    assert np.isclose(vv[0], sum(m * v[1 << i] ** 2 for i, m in enumerate(metric)))
    assert np.allclose(vv[1:], 0)
    e3, e14 = R.vector(3), R.vector(14)
    assert np.allclose(R.geometric(e3, e14), -R.geometric(e14, e3))
    b = R.outer(R.vector(2), v)
    vb = R.geometric(v, b)
    assert set(R._grades[np.flatnonzero(np.abs(vb) > 1e-12)].tolist()) <= {1, 3}
    u = R.vector(5) + 0.5 * R.vector(11)
    assert np.allclose(R.geometric(R.geometric(u, v), b), R.geometric(u, R.geometric(v, b)))
    # the complement still satisfies e_a ^ comp(e_a) = I (its definition) at this size
    I = R.pseudoscalar()
    for a in (R.blade((0, 7)), R.blade((3, 9, 15))):
        assert np.allclose(R.outer(a, R.complement(a)), I)


def test_matrix_operations_say_when_the_algebra_is_too_large():
    from generator.reference import MATRIX_MAX_N, TooLarge
    R = Reference([1] * (MATRIX_MAX_N + 1))
    with pytest.raises(TooLarge, match="matrix"):
        R.inverse(R.scalar(2.0))
