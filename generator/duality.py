"""Complements, the regressive product and metric duals (DESIGN section 3).

The right complement is metric-free: comp(e_A) = sigma_A e_~A with sigma_A chosen so that
e_A ^ comp(e_A) = I, the outer product of all basis vectors in spec order; sigma_A is the
reordering sign of (A, ~A).  The left complement is its inverse map.  The regressive product is
uncomp(comp(a) ^ comp(b)), so it works for degenerate metrics, and I v X = X.  The metric dual
X I^-1 and undual X I need an invertible metric; `model.check_kernel` refuses them otherwise.
"""
from __future__ import annotations

from fractions import Fraction

from .algebra import Algebra, reorder_sign


def full(alg: Algebra) -> int:
    return (1 << alg.n) - 1


def complement_sign(alg: Algebra, bitmap: int) -> int:
    return reorder_sign(bitmap, full(alg) ^ bitmap)


def complement(alg: Algebra, A: dict) -> dict:
    mask = full(alg)
    return {mask ^ k: {m: c * complement_sign(alg, k) for m, c in p.items()} for k, p in A.items()}


def uncomplement(alg: Algebra, A: dict) -> dict:
    """uncomp(e_B) = tau e_~B with comp(tau e_~B) = e_B, i.e. tau = sigma_~B."""
    mask = full(alg)
    return {mask ^ k: {m: c * complement_sign(alg, mask ^ k) for m, c in p.items()}
            for k, p in A.items()}


def pseudoscalar_square(alg: Algebra) -> Fraction:
    """I I as a rational number (I I is a scalar for any metric)."""
    terms = dict(alg.product(full(alg), full(alg)))
    return terms.get(0, Fraction(0))


def constant(bitmap: int, value: Fraction) -> dict:
    """A constant multivector value * e_bitmap (a polynomial of degree 0)."""
    return {bitmap: {(): Fraction(value)}}


def dual_factor(alg: Algebra) -> dict:
    """I^-1 = I / (I I)."""
    return constant(full(alg), 1 / pseudoscalar_square(alg))


def undual_factor(alg: Algebra) -> dict:
    return constant(full(alg), Fraction(1))
