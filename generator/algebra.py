"""Basis, metric and blades of one algebra, and the blade product rule.

Blades are bitmaps over the basis vectors: bit i is basis vector i in the spec's order (Dorst,
Fontijne & Mann, *Geometric Algebra for Computer Science*, 2007, ch. 19).  A blade's canonical
form has its factors in ascending basis order; a preferred name such as `e31` denotes the outer
product of its factors in the order written, i.e. `sign * canonical` with the sign of the
permutation.  Nothing here enumerates all 2^n blades: names and products are computed on demand,
so the cost of a derivation follows the declared types.

For a diagonal metric m, e_a e_b = reorder_sign(a, b) * prod_{i in a & b} m_i * e_{a ^ b}.  A full
(non-orthogonal) metric is delegated to `metric.py`, which works in a diagonal frame.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from math import comb

from .ir import Component


def popcount(x: int) -> int:
    return bin(x).count("1")


def indices(bitmap: int) -> tuple[int, ...]:
    """Basis indices of a bitmap, ascending."""
    out, i = [], 0
    while bitmap:
        if bitmap & 1:
            out.append(i)
        bitmap >>= 1
        i += 1
    return tuple(out)


def reorder_sign(a: int, b: int) -> int:
    """Sign of bringing e_a e_b into canonical order: parity of the pairs (i in a, j in b, i > j)."""
    a >>= 1
    swaps = 0
    while a:
        swaps += popcount(a & b)
        a >>= 1
    return -1 if swaps & 1 else 1


def permutation_sign(seq: tuple[int, ...]) -> int:
    """Sign of the permutation that sorts `seq` (distinct entries)."""
    inversions = sum(1 for i in range(len(seq)) for j in range(i + 1, len(seq)) if seq[i] > seq[j])
    return -1 if inversions & 1 else 1


def canonical_key(bitmap: int) -> tuple:
    """Sort key of the canonical blade order: by grade, then by the tuple of basis indices."""
    return (popcount(bitmap), indices(bitmap))


def grade_count(n: int, k: int) -> int:
    return comb(n, k)


class NameError_(ValueError):
    """A blade name that does not parse or is not the blade's name in this algebra."""


@dataclass(frozen=True)
class BladeName:
    name: str
    factors: tuple[int, ...]


class Algebra:
    """One algebra: basis names, metric matrix, blade naming and the product of two blades."""

    def __init__(self, name: str, basis: tuple[str, ...], metric, preferred: tuple[str, ...] = ()):
        self.name, self.basis, self.n = name, tuple(basis), len(basis)
        self.metric = tuple(tuple(Fraction(x) for x in row) for row in metric)
        self.diagonal = all(self.metric[i][j] == 0 for i in range(self.n)
                            for j in range(self.n) if i != j)
        self.short = all(len(b) == 2 and b[0] == "e" for b in basis)
        self._index = {b[1] if self.short else b: i for i, b in enumerate(basis)}
        self._preferred: dict[int, BladeName] = {}
        self._frame = None
        self._diag = self.metric_diag
        for name_ in preferred:
            self.add_preferred(name_)

    # --- names ------------------------------------------------------------------------------
    def parse(self, name: str) -> tuple[int, ...]:
        """Factor indices of a blade name, in the order written (raises NameError_)."""
        if name == "s":
            return ()
        if self.short:
            if not name.startswith("e") or len(name) < 2:
                raise NameError_(f"{name!r} is not a blade name: write 'e' followed by basis indices "
                                 f"({', '.join(self.basis)}), or 's' for the scalar")
            parts = list(name[1:])
        else:
            parts = name.split("^")
        factors = []
        for p in parts:
            if p not in self._index:
                raise NameError_(f"{name!r}: {p!r} is not a basis vector of this algebra "
                                 f"(basis: {', '.join(self.basis)})")
            factors.append(self._index[p])
        if len(set(factors)) != len(factors):
            raise NameError_(f"{name!r} repeats a basis vector; a blade has distinct factors")
        return tuple(factors)

    def spell(self, factors: tuple[int, ...]) -> str:
        if not factors:
            return "s"
        if self.short:
            return "e" + "".join(self.basis[i][1] for i in factors)
        return "^".join(self.basis[i] for i in factors)

    def add_preferred(self, name: str) -> BladeName:
        factors = self.parse(name)
        bitmap = sum(1 << i for i in factors)
        if len(factors) < 2:
            raise NameError_(f"{name!r}: only blades of grade 2 and higher can be renamed")
        if bitmap in self._preferred:
            raise NameError_(f"{name!r} names the same blade as {self._preferred[bitmap].name!r}")
        self._preferred[bitmap] = BladeName(name, factors)
        return self._preferred[bitmap]

    def blade_name(self, bitmap: int) -> BladeName:
        if bitmap in self._preferred:
            return self._preferred[bitmap]
        factors = indices(bitmap)
        return BladeName(self.spell(factors), factors)

    def component(self, bitmap: int) -> Component:
        bn = self.blade_name(bitmap)
        return Component(bn.name, bn.name.replace("^", "_"), bitmap, bn.factors,
                         permutation_sign(bn.factors))

    def lookup(self, name: str) -> Component:
        """The component a name denotes; an alternative spelling is an error naming the real one."""
        factors = self.parse(name)
        bitmap = sum(1 << i for i in factors)
        comp = self.component(bitmap)
        if comp.name != name:
            canon = self.spell(indices(bitmap))
            sign = "-" if permutation_sign(comp.factors) != permutation_sign(factors) else ""
            raise NameError_(f"{name!r} is written {comp.name!r} in this algebra "
                             f"({name} = {sign}{comp.name}; canonical {canon})")
        return comp

    def grade_bitmaps(self, grade: int) -> list[int]:
        """All blades of one grade, in canonical order (C(n, grade) of them)."""
        from itertools import combinations
        return [sum(1 << i for i in c) for c in combinations(range(self.n), grade)]

    # --- products ---------------------------------------------------------------------------
    @property
    def degenerate(self) -> bool:
        from .metric import determinant
        return determinant(self.metric) == 0

    def product(self, a: int, b: int) -> tuple[tuple[int, Fraction], ...]:
        """Geometric product of canonical blades a, b as ((bitmap, coef), ...) in canonical blades."""
        if self.diagonal:
            return _diag_product(self._diag, a, b)
        if self._frame is None:
            from .metric import Frame
            self._frame = Frame(self.metric)
        return self._frame.product(a, b)

    @property
    def metric_diag(self) -> tuple:
        """The diagonal, with integral entries as ints (exact, and faster than Fractions)."""
        return tuple(exact(self.metric[i][i]) for i in range(self.n))


def exact(x: Fraction):
    """An int when x is integral, else the Fraction: same value, cheaper arithmetic."""
    return int(x) if x.denominator == 1 else x


@lru_cache(maxsize=1 << 18)
def _diag_product(diag: tuple, a: int, b: int) -> tuple[tuple[int, Fraction], ...]:
    coef = reorder_sign(a, b)
    common = a & b
    for i in indices(common):
        coef *= diag[i]
        if not coef:
            return ()
    return ((a ^ b, coef),)
