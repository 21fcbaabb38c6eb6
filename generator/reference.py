"""Independent dense reference ("oracle") for Clifford algebras.

This module deliberately shares no code with the rest of bladesmith: it imports only numpy,
fractions, itertools, math and (optionally) scipy.linalg, and it does not use the blade
product rule (reordering sign times metric factors) at all.  Instead it builds the algebra
as the Clifford action on the exterior algebra (Chevalley's construction):

* The vector space is the exterior algebra of R^n, of dimension 2**n.  A dense multivector
  is a numpy array of length 2**n indexed by bitmap: bit i set means basis vector f_i is a
  factor.  The entry at bitmap A is the coefficient of the wedge blade
  f_{i1} ^ f_{i2} ^ ... with i1 < i2 < ... (ascending order).

* Each basis vector f_i acts on that space as L_i = W_i + C_i, where

    W_i e_A = (-1)^(number of elements of A below i) e_{A + i}       (0 if i in A)
    C_i e_A = sum_k (-1)^k G[i, a_k] e_{A - a_k}                     (a_k: k-th element of A,
                                                                       0-based, ascending)

  W_i is the exterior product with f_i from the left, C_i the left contraction with f_i
  under the symmetric bilinear form G.  These operators satisfy
  L_i L_j + L_j L_i = 2 G[i, j], so they generate the Clifford algebra of G; the map
  x -> x . 1 identifies the Clifford algebra with the exterior algebra, and under it the
  Clifford outer product of vectors is the exterior wedge (this holds for every symmetric G:
  diagonal, degenerate or non-orthogonal).

* The left-multiplication matrix M(A) of every wedge blade is built recursively.  With i the
  lowest element of A and B = A without i, e_A = f_i ^ e_B, and for a vector
  f_i ^ X = f_i X - f_i _| X, hence

    M(A) = L_i M(B) - sum_k (C_i e_B)_k M(e_{B - b_k}),     M(empty) = identity.

  Stacking the M(A) gives the full product tensor T[a, c, b] = coefficient of e_c in
  e_a e_b; it is built once per instance and cached.

* All other products are defined from the geometric product and grade selection on the
  homogeneous parts of the arguments (outer r+s, left contraction s-r, right contraction
  r-s, scalar 0, fat dot |r-s|, Hestenes inner |r-s| but zero for scalar arguments).
  Unary operations (reverse, involution, conjugate, complement, dual, inverse, exp) follow
  their definitions directly.

dtype=float gives float64 arithmetic; dtype=object gives exact Fraction arithmetic (use it for
small n only: the exact tables cost about 2**(3n) Fraction operations).

With float64 the products never build the tensor: the same recursion is applied to the
right-hand factor instead of to matrices,

    e_A X = L_i (e_B X) - sum_k (C_i e_B)_k e_{B - b_k} X,     e_empty X = X,

with each L_i applied to a dense vector through index arrays (`_actions`: the entries of W_i
and C_i, never a 2^n x 2^n matrix), and A X = sum_A A[A] e_A X over the non-zero entries of A.
A product then costs about (non-zero entries of A) x grade x 2^n operations and 2^n floats per
intermediate, so the reference serves every dimension a spec allows (16).  `left_matrix`
(inverse, exp) is built by columns from that product, up to `MATRIX_MAX_N`.  Only the exact
tables build the tensor; tests check the two paths against each other.
"""

import itertools
import math
from fractions import Fraction

import numpy as np

try:  # optional, only for exp() with float tables
    import scipy.linalg as _scipy_linalg
except Exception:  # pragma: no cover - scipy is a dependency, but keep the oracle standalone
    _scipy_linalg = None

__all__ = ["Reference", "TooLarge"]

MATRIX_MAX_N = 10       # largest n for which a 2^n x 2^n matrix is built (inverse, exp)
MEMO_BYTES = 1 << 28    # intermediates one float product may keep (256 MiB)


class TooLarge(ValueError):
    """The operation needs a dense 2^n x 2^n matrix, and n is above MATRIX_MAX_N."""


def _popcount(x):
    return bin(x).count("1")


def _elements(bitmap, n):
    """Indices of the set bits of bitmap, ascending."""
    return [i for i in range(n) if (bitmap >> i) & 1]


def _to_fraction(x):
    """Exact rational value of a metric entry (int, Fraction, float, numpy number or str)."""
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, bool):
        raise TypeError("metric entries must be numbers, not bool")
    if isinstance(x, (int, Fraction)):
        return Fraction(x)
    if isinstance(x, float):
        if not math.isfinite(x):
            raise ValueError(f"metric entry {x!r} is not finite")
        return Fraction(x)
    if isinstance(x, str):
        return Fraction(x)
    raise TypeError(f"unsupported metric entry {x!r} of type {type(x).__name__}")


def _exact_det(rows):
    """Determinant of a square matrix of Fractions by Gaussian elimination."""
    m = [list(r) for r in rows]
    size = len(m)
    det = Fraction(1)
    for col in range(size):
        pivot = next((r for r in range(col, size) if m[r][col] != 0), None)
        if pivot is None:
            return Fraction(0)
        if pivot != col:
            m[col], m[pivot] = m[pivot], m[col]
            det = -det
        p = m[col][col]
        det *= p
        for r in range(col + 1, size):
            f = m[r][col] / p
            if f != 0:
                for c in range(col, size):
                    m[r][c] -= f * m[col][c]
    return det


def _exact_solve(matrix, rhs):
    """Solve matrix x = rhs exactly (object arrays of Fractions); None if singular."""
    size = matrix.shape[0]
    m = [[Fraction(v) for v in row] + [Fraction(b)] for row, b in zip(matrix.tolist(), rhs.tolist())]
    for col in range(size):
        pivot = next((r for r in range(col, size) if m[r][col] != 0), None)
        if pivot is None:
            return None
        m[col], m[pivot] = m[pivot], m[col]
        p = m[col][col]
        row_p = [v / p for v in m[col]]
        m[col] = row_p
        for r in range(size):
            if r != col and m[r][col] != 0:
                f = m[r][col]
                m[r] = [a - f * b for a, b in zip(m[r], row_p)]
    out = np.empty(size, dtype=object)
    for i in range(size):
        out[i] = m[i][size]
    return out


# Grade rules for a pair of homogeneous parts of grades r (left) and s (right):
# the grade kept from their geometric product, or None when the pair contributes nothing.
def _rule_outer(r, s):
    return r + s


def _rule_left(r, s):
    return s - r if s >= r else None


def _rule_right(r, s):
    return r - s if r >= s else None


def _rule_scalar(r, s):
    return 0


def _rule_fat(r, s):
    return abs(r - s)


def _rule_hestenes(r, s):
    return None if r == 0 or s == 0 else abs(r - s)


class Reference:
    """Dense Clifford algebra of a symmetric bilinear form, for checking generated code."""

    def __init__(self, metric, dtype=float):
        """metric: length-n list (diagonal) or n x n nested list (symmetric); entries int,
        Fraction, or float.  dtype=float -> float64 tables; dtype=object -> exact Fraction
        arithmetic (for small n in tests)."""
        if dtype is object or (dtype is not float and np.dtype(dtype) == np.dtype(object)):
            self.exact = True
            self.dtype = np.dtype(object)
        elif dtype is float or np.dtype(dtype) == np.dtype(np.float64):
            self.exact = False
            self.dtype = np.dtype(np.float64)
        else:
            raise ValueError(f"dtype must be float or object, not {dtype!r}")

        self.metric_exact = self._parse_metric(metric)  # tuple of tuples of Fraction
        self.n = len(self.metric_exact)
        self.size = 1 << self.n
        self.G = self._zeros((self.n, self.n))
        for i in range(self.n):
            for j in range(self.n):
                self.G[i, j] = self._coef(self.metric_exact[i][j])
        self.degenerate = _exact_det(self.metric_exact) == 0 if self.n else False

        self._grades = np.array([_popcount(a) for a in range(self.size)], dtype=np.int64)
        self._by_grade = [np.flatnonzero(self._grades == k) for k in range(self.n + 1)]
        self._full = self.size - 1
        self._W = None
        self._C = None
        self._T = None
        self._act = None
        self._comp_sign = None
        self._pseudo_sq = None

    # ------------------------------------------------------------------ set-up helpers
    @staticmethod
    def _parse_metric(metric):
        if isinstance(metric, np.ndarray):
            metric = metric.tolist()
        rows = list(metric)
        n = len(rows)
        is_seq = [isinstance(r, (list, tuple, np.ndarray)) for r in rows]
        if n and all(is_seq):
            mat = [[_to_fraction(x) for x in (r.tolist() if isinstance(r, np.ndarray) else r)]
                   for r in rows]
            if any(len(r) != n for r in mat):
                raise ValueError("metric matrix must be square")
            for i in range(n):
                for j in range(i + 1, n):
                    if mat[i][j] != mat[j][i]:
                        raise ValueError(f"metric matrix is not symmetric at ({i}, {j})")
        elif not any(is_seq):
            diag = [_to_fraction(x) for x in rows]
            mat = [[diag[i] if i == j else Fraction(0) for j in range(n)] for i in range(n)]
        else:
            raise ValueError("metric must be a flat list (diagonal) or a nested list (matrix)")
        return tuple(tuple(r) for r in mat)

    def _coef(self, x):
        """A number in the table's arithmetic."""
        if self.exact:
            if isinstance(x, np.generic):
                x = x.item()
            if isinstance(x, (int, float, Fraction)) and not isinstance(x, bool):
                return Fraction(x)
            return x
        return float(x)

    def _zeros(self, shape):
        if self.exact:
            return np.full(shape, Fraction(0), dtype=object)
        return np.zeros(shape, dtype=np.float64)

    def _coerce(self, A):
        A = np.asarray(A)
        if A.shape != (self.size,):
            raise ValueError(f"expected a multivector of shape ({self.size},), got {A.shape}")
        if self.exact:
            out = np.empty(self.size, dtype=object)
            for k, x in enumerate(A.tolist()):
                out[k] = self._coef(x)
            return out
        return np.array(A, dtype=np.float64)

    def _is_zero(self, A):
        if self.exact:
            return all(x == 0 for x in A.tolist())
        return not np.any(A)

    def _recip(self, x):
        return Fraction(1) / Fraction(x) if self.exact else 1.0 / float(x)

    def _vector_ops(self):
        """The operators W_i (wedge with f_i) and C_i (contraction with f_i), cached."""
        if self._W is None:
            n, size = self.n, self.size
            W = [self._zeros((size, size)) for _ in range(n)]
            C = [self._zeros((size, size)) for _ in range(n)]
            for i in range(n):
                below = (1 << i) - 1
                for A in range(size):
                    if not (A >> i) & 1:
                        W[i][A | (1 << i), A] = self._coef(-1 if _popcount(A & below) % 2 else 1)
                    for k, a in enumerate(_elements(A, n)):
                        g = self.metric_exact[i][a]
                        if g != 0:
                            term = self._coef(-g if k % 2 else g)
                            C[i][A & ~(1 << a), A] = C[i][A & ~(1 << a), A] + term
            self._W, self._C = W, C
        return self._W, self._C

    def _actions(self):
        """W_i and C_i as index arrays (float path), from the same definitions as `_vector_ops`:
        per i, the wedge as (source bitmaps, target bitmaps, signs), and the contraction as one
        such triple per j with G[i, j] != 0 (source: the bitmaps holding j, target: without j,
        value (-1)^(position of j) G[i, j]).  Within a triple the targets are distinct."""
        if self._act is None:
            n, every = self.n, np.arange(self.size)
            wedge, contraction = [], []
            for i in range(n):
                src = every[(every >> i) & 1 == 0]
                wedge.append((src, src | (1 << i), self._below_signs(i, src)))
                terms = []
                for j in range(n):
                    g = float(self.metric_exact[i][j])
                    if g != 0:
                        src_j = every[(every >> j) & 1 == 1]
                        terms.append((src_j, src_j & ~(1 << j), g * self._below_signs(j, src_j)))
                contraction.append(terms)
            self._act = (wedge, contraction)
        return self._act

    def _below_signs(self, i, bitmaps):
        """(-1)^(number of elements of each bitmap below i), as floats."""
        return np.where(self._grades[bitmaps & ((1 << i) - 1)] % 2 == 1, -1.0, 1.0)

    def _wedge(self, i, X):
        """W_i X for a dense float vector X."""
        src, dst, sign = self._actions()[0][i]
        out = np.zeros(self.size)
        out[dst] = sign * X[src]
        return out

    def _apply_L(self, i, X):
        """L_i X = W_i X + C_i X for a dense float vector X."""
        out = self._wedge(i, X)
        for src, dst, value in self._actions()[1][i]:
            out[dst] += value * X[src]
        return out

    def _blade_times(self, a, X, memo):
        """e_a X (float path), by the recursion of the module docstring; memo: {a: e_a X}, emptied
        when it would pass MEMO_BYTES (a full multivector at n = 16 would otherwise keep 2^16
        intermediates of 2^16 floats; values are only recomputed, never wrong)."""
        if a == 0:
            return X
        if a not in memo:
            i = (a & -a).bit_length() - 1       # lowest factor of a
            b = a ^ (1 << i)
            Y = self._apply_L(i, self._blade_times(b, X, memo))
            for k, j in enumerate(_elements(b, self.n)):    # minus (f_i _| e_b) X
                g = self.metric_exact[i][j]
                if g != 0:
                    Y = Y - (-float(g) if k % 2 else float(g)) * self._blade_times(b ^ (1 << j), X, memo)
            if len(memo) * 8 * self.size >= MEMO_BYTES:
                memo.clear()
            memo[a] = Y
        return memo[a]

    def _apply_sparse(self, op, M):
        """op @ M, exploiting the sparsity of op (used for exact tables)."""
        out = self._zeros(M.shape)
        rows, cols = np.nonzero(op != 0) if not self.exact else _nonzero_object(op)
        for r, c in zip(rows, cols):
            out[r] = out[r] + op[r, c] * M[c]
        return out

    def _tensor(self):
        """T[a, c, b] = coefficient of e_c in e_a e_b (cached)."""
        if self._T is None:
            W, C = self._vector_ops()
            size = self.size
            L = [W[i] + C[i] for i in range(self.n)]
            T = self._zeros((size, size, size))
            for k in range(size):
                T[0, k, k] = self._coef(1)
            for A in range(1, size):  # every blade referenced below has a smaller bitmap
                i = (A & -A).bit_length() - 1  # lowest factor of A
                B = A ^ (1 << i)
                if self.exact:
                    M = self._apply_sparse(L[i], T[B])
                else:
                    M = L[i] @ T[B]
                contraction = C[i][:, B]  # f_i _| e_B as a dense multivector
                for idx in range(size):
                    c = contraction[idx]
                    if c != 0:
                        M = M - c * T[idx]
                T[A] = M
            self._T = T
        return self._T

    # ------------------------------------------------------------------ construction
    def zero(self):
        return self._zeros(self.size)

    def scalar(self, x):
        out = self.zero()
        out[0] = self._coef(x)
        return out

    def vector(self, i):
        if not 0 <= i < self.n:
            raise ValueError(f"basis vector index {i} out of range for n = {self.n}")
        out = self.zero()
        out[1 << i] = self._coef(1)
        return out

    def blade(self, factors):
        """Wedge product of basis vectors in the given order (metric-free, via the W_i)."""
        factors = list(factors)
        for i in factors:
            if not 0 <= i < self.n:
                raise ValueError(f"basis vector index {i} out of range for n = {self.n}")
        out = self.scalar(1)
        if self.exact:
            W, _ = self._vector_ops()
            for i in reversed(factors):  # f_a ^ (f_b ^ (... ^ 1))
                out = W[i] @ out
            return out
        for i in reversed(factors):
            out = self._wedge(i, out)
        return out

    def grade_of(self, bitmap):
        if not 0 <= bitmap < self.size:
            raise ValueError(f"bitmap {bitmap} out of range for n = {self.n}")
        return _popcount(bitmap)

    def project(self, A, grades):
        A = self._coerce(A)
        if isinstance(grades, (int, np.integer)):
            grades = [grades]
        keep = set(int(g) for g in grades)
        out = self.zero()
        for g in keep:
            if 0 <= g <= self.n:
                idx = self._by_grade[g]
                out[idx] = A[idx]
        return out

    # ------------------------------------------------------------------ products
    def left_matrix(self, A):
        """2^n x 2^n matrix of X -> A X (TooLarge above MATRIX_MAX_N dimensions)."""
        if self.n > MATRIX_MAX_N:
            raise TooLarge(f"the reference needs a {self.size} x {self.size} matrix here; it builds "
                           f"them only up to n = {MATRIX_MAX_N} (this algebra has n = {self.n})")
        A = self._coerce(A)
        if not self.exact:      # column b is A e_b, by the float product
            return np.stack([self.geometric(A, unit) for unit in np.eye(self.size)], axis=1)
        T = self._tensor()
        out = self._zeros((self.size, self.size))
        for a in range(self.size):
            if A[a] != 0:
                out = out + A[a] * T[a]
        return out

    def _right_action(self, B):
        """Y[a, c] = coefficient of e_c in e_a B (exact tables)."""
        T = self._tensor()
        Y = self._zeros((self.size, self.size))
        for b in range(self.size):
            if B[b] != 0:
                Y = Y + B[b] * T[:, :, b]
        return Y

    def geometric(self, A, B):
        A, B = self._coerce(A), self._coerce(B)
        if self.exact:
            return A @ self._right_action(B)
        out, memo = self.zero(), {}
        for a in np.flatnonzero(A):
            out += A[a] * self._blade_times(int(a), B, memo)
        return out

    def _graded(self, A, B, rule):
        """Sum over homogeneous parts A_r, B_s of <A_r B_s>_{rule(r, s)}."""
        A, B = self._coerce(A), self._coerce(B)
        if not self.exact:
            return self._graded_float(A, B, rule)
        out = self.zero()
        for s in range(self.n + 1):
            Bs = self.project(B, [s])
            if self._is_zero(Bs):
                continue
            Y = self._right_action(Bs)
            for r in range(self.n + 1):
                g = rule(r, s)
                if g is None or not 0 <= g <= self.n:
                    continue
                ir, ig = self._by_grade[r], self._by_grade[g]
                Ar = A[ir]
                if self._is_zero(Ar):
                    continue
                out[ig] = out[ig] + Ar @ Y[np.ix_(ir, ig)]
        return out

    def _graded_float(self, A, B, rule):
        """`_graded` by the float product of each pair of non-zero homogeneous parts."""
        out = self.zero()
        parts = [(r, self.project(A, [r])) for r in range(self.n + 1)]
        parts = [(r, Ar) for r, Ar in parts if not self._is_zero(Ar)]
        for s in range(self.n + 1):
            Bs = self.project(B, [s])
            if self._is_zero(Bs):
                continue
            for r, Ar in parts:
                g = rule(r, s)
                if g is not None and 0 <= g <= self.n:
                    ig = self._by_grade[g]
                    out[ig] += self.geometric(Ar, Bs)[ig]
        return out

    def outer(self, A, B):
        return self._graded(A, B, _rule_outer)

    def left_contraction(self, A, B):
        return self._graded(A, B, _rule_left)

    def right_contraction(self, A, B):
        return self._graded(A, B, _rule_right)

    def scalar_product(self, A, B):
        return self._graded(A, B, _rule_scalar)

    def fat_dot(self, A, B):
        return self._graded(A, B, _rule_fat)

    def hestenes_inner(self, A, B):
        return self._graded(A, B, _rule_hestenes)

    def commutator(self, A, B):
        half = Fraction(1, 2) if self.exact else 0.5
        return (self.geometric(A, B) - self.geometric(B, A)) * half

    def add(self, A, B):
        return self._coerce(A) + self._coerce(B)

    def sub(self, A, B):
        return self._coerce(A) - self._coerce(B)

    # ------------------------------------------------------------------ unary
    def _grade_signs(self, sign_of_grade):
        return [sign_of_grade(k) for k in range(self.n + 1)]

    def _by_grade_sign(self, A, sign_of_grade):
        A = self._coerce(A)
        out = A.copy()
        for k, sgn in enumerate(self._grade_signs(sign_of_grade)):
            if sgn < 0:
                idx = self._by_grade[k]
                out[idx] = -A[idx]
        return out

    def reverse(self, A):
        return self._by_grade_sign(A, lambda k: -1 if (k * (k - 1) // 2) % 2 else 1)

    def involute(self, A):
        return self._by_grade_sign(A, lambda k: -1 if k % 2 else 1)

    def conjugate(self, A):
        return self._by_grade_sign(A, lambda k: -1 if (k * (k + 1) // 2) % 2 else 1)

    def sandwich(self, V, X):
        """V X reverse(V), no normalization."""
        return self.geometric(self.geometric(V, X), self.reverse(V))

    def _complement_signs(self):
        """sigma[a] with e_a ^ (sigma[a] e_{~a}) = I, computed with the metric-free W_i."""
        if self._comp_sign is None:
            # e_a ^ e_{~a} = W_{a_1} ... W_{a_k} e_{~a}, on all basis blades at once: each W_i
            # maps e_X to (-1)^(elements of X below i) e_{X + i}; the signs are metric-free
            every = np.arange(self.size)
            x, s = self._full ^ every, np.ones(self.size)
            for i in reversed(range(self.n)):       # the factors of a, last first
                has = (every >> i) & 1 == 1
                s[has] *= self._below_signs(i, x[has])
                x[has] |= 1 << i
            self._comp_sign = [1 if v > 0 else -1 for v in s.tolist()]
        return self._comp_sign

    def complement(self, A):
        """Right complement: comp(e_a) = sigma e_{~a} with e_a ^ comp(e_a) = I."""
        A = self._coerce(A)
        sig = self._complement_signs()
        out = self.zero()
        for a in range(self.size):
            out[self._full ^ a] = A[a] if sig[a] > 0 else -A[a]
        return out

    def uncomplement(self, A):
        """Left complement: the inverse map of complement."""
        A = self._coerce(A)
        sig = self._complement_signs()
        out = self.zero()
        for b in range(self.size):
            a = self._full ^ b  # comp(e_a) = sig[a] e_b, so uncomp(e_b) = sig[a] e_a
            out[a] = A[b] if sig[a] > 0 else -A[b]
        return out

    def regressive(self, A, B):
        return self.uncomplement(self.outer(self.complement(A), self.complement(B)))

    def pseudoscalar(self):
        """I = f_0 ^ f_1 ^ ... ^ f_{n-1}."""
        out = self.zero()
        out[self._full] = self._coef(1)
        return out

    def _pseudoscalar_square(self):
        if self._pseudo_sq is None:
            I = self.pseudoscalar()
            self._pseudo_sq = self.geometric(I, I)[0]
        return self._pseudo_sq

    def _require_nondegenerate(self, what):
        if self.degenerate:
            raise ValueError(
                f"{what} needs a non-degenerate metric (the pseudoscalar has no inverse); "
                "use complement / uncomplement instead")

    def dual(self, A):
        """A I^{-1}."""
        self._require_nondegenerate("dual")
        I = self.pseudoscalar()
        return self.geometric(A, I) * self._recip(self._pseudoscalar_square())

    def undual(self, A):
        """A I."""
        self._require_nondegenerate("undual")
        return self.geometric(A, self.pseudoscalar())

    def norm_squared(self, A):
        """Scalar part of A reverse(A), as a dense multivector."""
        return self.project(self.geometric(A, self.reverse(A)), [0])

    def inverse(self, A):
        """General inverse by solving (left_matrix(A)) X = 1; ValueError if singular."""
        M = self.left_matrix(A)
        one = self.scalar(1)
        if self.exact:
            X = _exact_solve(M, one)
            if X is None:
                raise ValueError("multivector is not invertible")
            return X
        sv = np.linalg.svd(M, compute_uv=False)
        if sv[0] == 0 or sv[-1] <= sv[0] * self.size * np.finfo(np.float64).eps:
            raise ValueError("multivector is not invertible (left-multiplication matrix singular)")
        return np.linalg.solve(M, one)

    def exp(self, A):
        """exp(A) = sum_k A^k / k!, via the left-multiplication matrix.

        float tables: scipy.linalg.expm (or a scaled Taylor series without scipy).
        exact tables: exact when A is nilpotent (the series terminates); otherwise the result
        is not rational and is evaluated in float64 and returned as an object array of floats.
        """
        A = self._coerce(A)
        if self.exact:
            term = self.scalar(1)
            total = term.copy()
            for k in range(1, self.size + 1):
                term = self.geometric(A, term) * Fraction(1, k)
                if self._is_zero(term):
                    return total
                total = total + term
            # not nilpotent (a nilpotent element has A^size = 0): fall back to float64
            M = np.array([[float(x) for x in row] for row in self.left_matrix(A).tolist()])
            col = _expm(M)[:, 0]
            out = np.empty(self.size, dtype=object)
            for i, v in enumerate(col.tolist()):
                out[i] = float(v)
            return out
        return _expm(self.left_matrix(A))[:, 0].copy()

    # ------------------------------------------------------------------ dispatch
    _OPS = {
        "geometric": ("geometric", 2),
        "outer": ("outer", 2),
        "left_contraction": ("left_contraction", 2),
        "right_contraction": ("right_contraction", 2),
        "scalar": ("scalar_product", 2),
        "scalar_product": ("scalar_product", 2),
        "fat_dot": ("fat_dot", 2),
        "hestenes_inner": ("hestenes_inner", 2),
        "commutator": ("commutator", 2),
        "add": ("add", 2),
        "sub": ("sub", 2),
        "reverse": ("reverse", 1),
        "involute": ("involute", 1),
        "conjugate": ("conjugate", 1),
        "sandwich": ("sandwich", 2),
        "complement": ("complement", 1),
        "uncomplement": ("uncomplement", 1),
        "regressive": ("regressive", 2),
        "dual": ("dual", 1),
        "undual": ("undual", 1),
        "norm_squared": ("norm_squared", 1),
        "inverse": ("inverse", 1),
        "exp": ("exp", 1),
    }

    OPS = tuple(k for k in _OPS if k != "scalar_product")

    def apply(self, op, *args):
        """Dispatch by operation name (see OPS)."""
        try:
            method, arity = self._OPS[op]
        except KeyError:
            raise ValueError(f"unknown operation {op!r}; known: {', '.join(self.OPS)}") from None
        if len(args) != arity:
            raise TypeError(f"operation {op!r} takes {arity} argument(s), got {len(args)}")
        return getattr(self, method)(*args)


def _nonzero_object(op):
    rows, cols = [], []
    for r, row in enumerate(op.tolist()):
        for c, v in enumerate(row):
            if v != 0:
                rows.append(r)
                cols.append(c)
    return rows, cols


def _expm(M):
    """Matrix exponential: scipy if available, else scaling and squaring with Taylor."""
    if _scipy_linalg is not None:
        return _scipy_linalg.expm(M)
    norm = np.linalg.norm(M, 1)
    squarings = max(0, int(math.ceil(math.log2(norm))) + 1) if norm > 0 else 0
    X = M / (2.0 ** squarings)
    result = np.eye(M.shape[0])
    term = np.eye(M.shape[0])
    for k in itertools.count(1):
        term = term @ X / k
        result = result + term
        if np.linalg.norm(term, 1) <= 1e-17 * np.linalg.norm(result, 1) or k > 60:
            break
    for _ in range(squarings):
        result = result @ result
    return result
