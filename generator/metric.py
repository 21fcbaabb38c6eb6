"""Non-orthogonal metrics: exact rational congruence to a diagonal frame, and the blade basis change.

With a full symmetric metric G, blade names denote outer products of the spec's basis vectors
f_i.  Lagrange's method (symmetric Gaussian elimination, pairing a zero diagonal entry with a
non-zero off-diagonal one) finds a rational invertible P with P^T G P = D diagonal; the frame
vectors are g_k = sum_i P[i][k] f_i.  A product is computed by mapping both blades into the g
frame through the outermorphism of Q = P^-1 (minors of Q), multiplying there with the diagonal
rule, and mapping back through the minors of P.  Only Fractions: no floats, no square roots.
"""
from __future__ import annotations

from fractions import Fraction
from functools import lru_cache
from itertools import combinations

Matrix = list[list[Fraction]]


def determinant(m) -> Fraction:
    """Exact determinant by fraction-preserving Gaussian elimination."""
    a = [[Fraction(x) for x in row] for row in m]
    n, det = len(a), Fraction(1)
    for k in range(n):
        pivot = next((r for r in range(k, n) if a[r][k] != 0), None)
        if pivot is None:
            return Fraction(0)
        if pivot != k:
            a[k], a[pivot] = a[pivot], a[k]
            det = -det
        det *= a[k][k]
        for r in range(k + 1, n):
            f = a[r][k] / a[k][k]
            if f:
                a[r] = [x - f * y for x, y in zip(a[r], a[k])]
    return det


def congruence(g) -> tuple[Matrix, list[Fraction]]:
    """P and the diagonal D with P^T G P = diag(D), by Lagrange's method."""
    n = len(g)
    a = [[Fraction(x) for x in row] for row in g]
    p = [[Fraction(int(i == j)) for j in range(n)] for i in range(n)]
    for k in range(n):
        if a[k][k] == 0:
            j = next((j for j in range(k + 1, n) if a[k][j] != 0), None)
            if j is None:
                continue
            s = 1 if 2 * a[k][j] + a[j][j] != 0 else -1
            _add_vector(a, p, k, j, Fraction(s))           # v_k += s v_j
        for j in range(k + 1, n):
            if a[k][j]:
                _add_vector(a, p, j, k, -a[k][j] / a[k][k])   # v_j -= c v_k
    return p, [a[i][i] for i in range(n)]


def _add_vector(a: Matrix, p: Matrix, k: int, j: int, c: Fraction) -> None:
    """Replace basis vector k by v_k + c v_j, updating the Gram matrix a and the columns of p."""
    n = len(a)
    for i in range(n):
        p[i][k] += c * p[i][j]
    for i in range(n):
        a[k][i] += c * a[j][i]
    for i in range(n):
        a[i][k] += c * a[i][j]


def inverse(m: Matrix) -> Matrix:
    n = len(m)
    a = [[Fraction(x) for x in row] + [Fraction(int(i == j)) for j in range(n)]
         for i, row in enumerate(m)]
    for k in range(n):
        pivot = next(r for r in range(k, n) if a[r][k] != 0)
        a[k], a[pivot] = a[pivot], a[k]
        a[k] = [x / a[k][k] for x in a[k]]
        for r in range(n):
            if r != k and a[r][k]:
                f = a[r][k]
                a[r] = [x - f * y for x, y in zip(a[r], a[k])]
    return [row[n:] for row in a]


def _bits(x: int) -> tuple[int, ...]:
    return tuple(i for i in range(x.bit_length()) if x >> i & 1)


class Frame:
    """The diagonal frame of a full metric and the products computed through it."""

    def __init__(self, metric):
        self.p, self.diag = congruence(metric)
        self.q = inverse(self.p)
        self.n = len(metric)
        self._to = lru_cache(maxsize=None)(lambda b: _outermorphism(self.q, b, self.n))
        self._back = lru_cache(maxsize=None)(lambda b: _outermorphism(self.p, b, self.n))
        self._cache: dict[tuple[int, int], tuple] = {}

    def product(self, a: int, b: int) -> tuple[tuple[int, Fraction], ...]:
        key = (a, b)
        if key not in self._cache:
            self._cache[key] = self._product(a, b)
        return self._cache[key]

    def _product(self, a: int, b: int):
        from .algebra import _diag_product
        diag = tuple(self.diag)
        in_frame: dict[int, Fraction] = {}
        for ka, ca in self._to(a):
            for kb, cb in self._to(b):
                for kc, cc in _diag_product(diag, ka, kb):
                    in_frame[kc] = in_frame.get(kc, Fraction(0)) + ca * cb * cc
        out: dict[int, Fraction] = {}
        for kc, c in in_frame.items():
            if c:
                for j, cj in self._back(kc):
                    out[j] = out.get(j, Fraction(0)) + c * cj
        return tuple(sorted((j, c) for j, c in out.items() if c))


def _outermorphism(m: Matrix, bitmap: int, n: int) -> tuple[tuple[int, Fraction], ...]:
    """Image of the blade e_bitmap under the linear map whose columns are m's columns.

    The blade wedge_{i in cols} (sum_r m[r][i] e_r) = sum over row sets R of det(m[R, cols]) e_R.
    """
    cols = _bits(bitmap)
    if not cols:
        return ((0, Fraction(1)),)
    live = [r for r in range(n) if any(m[r][c] for c in cols)]
    out = []
    for rows in combinations(live, len(cols)):
        d = determinant([[m[r][c] for c in cols] for r in rows])
        if d:
            out.append((sum(1 << r for r in rows), d))
    return tuple(out)
