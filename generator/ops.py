"""The catalogue of operations: arity, definition, and how each is derived.

Each operation is a row of `CATALOGUE`.  A bilinear product is defined by the geometric product
of two blades followed by a grade rule on (r, s, g) — the grades of the factors and of the
product blade (DESIGN section 3; Dorst, *The Inner Products of Geometric Algebra*, 2002).  A
unary involution is a sign per grade.  `add` and `sub` are linear.  Adding an operation means
adding a row here (and, for a new kind, a derivation rule in `derive.py`).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable


@dataclass(frozen=True)
class Operation:
    name: str
    arity: int
    kind: str                           # "bilinear", "commutator", "grade_sign", "linear"
    formula: str                        # one line for docstrings, README and `show`
    keep: Callable[[int, int, int], bool] | None = None     # bilinear grade rule (r, s, g)
    sign: Callable[[int], int] | None = None                # grade_sign rule
    linear_sign: int = 1                                    # linear: +1 add, -1 sub
    nondegenerate: bool = False                             # needs an invertible metric


def _row(name, arity, kind, formula, **kw) -> tuple[str, Operation]:
    return name, Operation(name, arity, kind, formula, **kw)


CATALOGUE: dict[str, Operation] = dict([
    _row("geometric", 2, "bilinear", "a b", keep=lambda r, s, g: True),
    _row("outer", 2, "bilinear", "a ^ b: grade r+s part of a_r b_s", keep=lambda r, s, g: g == r + s),
    _row("left_contraction", 2, "bilinear", "a _| b: grade s-r part of a_r b_s (zero if r > s)",
         keep=lambda r, s, g: s >= r and g == s - r),
    _row("right_contraction", 2, "bilinear", "a |_ b: grade r-s part of a_r b_s (zero if s > r)",
         keep=lambda r, s, g: r >= s and g == r - s),
    _row("scalar", 2, "bilinear", "a * b: grade 0 part of a b", keep=lambda r, s, g: g == 0),
    _row("fat_dot", 2, "bilinear", "a . b: grade |r-s| part of a_r b_s",
         keep=lambda r, s, g: g == abs(r - s)),
    _row("hestenes_inner", 2, "bilinear",
         "grade |r-s| part of a_r b_s, zero when r = 0 or s = 0",
         keep=lambda r, s, g: r != 0 and s != 0 and g == abs(r - s)),
    _row("commutator", 2, "commutator", "a x b = (a b - b a) / 2"),
    _row("add", 2, "linear", "a + b (union of the blades)", linear_sign=1),
    _row("sub", 2, "linear", "a - b (union of the blades)", linear_sign=-1),
    _row("reverse", 1, "grade_sign", "~a: grade k scaled by (-1)^(k(k-1)/2)",
         sign=lambda k: -1 if (k * (k - 1) // 2) % 2 else 1),
    _row("involute", 1, "grade_sign", "grade involution: grade k scaled by (-1)^k",
         sign=lambda k: -1 if k % 2 else 1),
    _row("conjugate", 1, "grade_sign", "Clifford conjugate: grade k scaled by (-1)^(k(k+1)/2)",
         sign=lambda k: -1 if (k * (k + 1) // 2) % 2 else 1),
    _row("sandwich", 2, "sandwich", "a b ~a (no normalization)"),
    _row("sandwich_matrix", 2, "sandwich_matrix",
         "matrix M(a) of x -> a x ~a, row-major: out[r] = sum_c M[r][c] x[c]"),
    _row("complement", 1, "complement", "right complement: e_A ^ comp(e_A) = I (metric-free)"),
    _row("uncomplement", 1, "uncomplement", "left complement: the inverse map of complement"),
    _row("regressive", 2, "regressive", "a v b = uncomp(comp(a) ^ comp(b)) (metric-free)"),
    _row("dual", 1, "dual", "a I^-1 (non-degenerate metrics only)", nondegenerate=True),
    _row("undual", 1, "undual", "a I (non-degenerate metrics only)", nondegenerate=True),
    _row("norm_squared", 1, "norm_squared", "<a ~a>_0"),
    _row("inverse", 1, "inverse", "~a (a ~a)^-1, for types whose a ~a is a scalar (plus a null pseudoscalar)"),
    _row("up", 1, "up", "conformal up-projection x + o + (x.x) i / (-2 o.i); keys origin, infinity"),
    _row("exp", 1, "exp", "exp(a) in closed form, for a whose square is a scalar (plus a null pseudoscalar)"),
])


def names() -> list[str]:
    return list(CATALOGUE)
