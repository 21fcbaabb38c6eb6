"""The generic-library approach: full multivectors and `numpy.einsum` with the full product tensor.

A generic library stores every element as a dense multivector of 2^n components and multiplies
with the whole table T[a, c, b] = coefficient of e_c in e_a e_b.  T is built here from our
independent reference, `generator.reference.Reference`, through its public `left_matrix` of each
basis blade; no derivation code is used.  A product of N pairs is

    np.einsum("ni,ijk,nk->nj", x, T, y, optimize=PATH)

with PATH contracting T with y first (a BLAS matrix product, (4^n, 2^n) by (2^n, N)), then the
result with x: the fastest plan measured here (x with T first leaves an intermediate whose
layout makes the second step up to four times slower at n = 5; numpy's default, one
three-operand loop without BLAS, is five to ten times slower).  Rows go through in chunks of
CHUNK, so the (N, 2^n, 2^n) intermediate stays small: this favours einsum, which on a whole
10^6-row batch would need gigabytes.  A sandwich is two products, V X, then (V X) ~V.  The
inputs are converted to dense multivectors before timing (a generic library keeps them so);
`embed`/`extract` map the components of our declared types to and from that form, for the
cross-check of the results.
"""
from __future__ import annotations

from fractions import Fraction

import numpy as np

from generator import model, spec as spec_mod
from generator.reference import Reference

CHUNK = 4096
PATH = ["einsum_path", (1, 2), (0, 1)]


def metric(manifest: dict) -> list:
    """The manifest's metric (rational strings, diagonal or matrix) as Fractions."""
    rows = manifest["algebra"]["metric"]
    if rows and isinstance(rows[0], list):
        return [[Fraction(x) for x in row] for row in rows]
    return [Fraction(x) for x in rows]


class Dense:
    """Dense products in one algebra, and the maps between our types and dense multivectors."""

    def __init__(self, spec_path, manifest: dict):
        self.ref = Reference(metric(manifest))
        size = self.ref.size
        units = np.eye(size)
        self.T = np.stack([self.ref.left_matrix(units[a]) for a in range(size)])
        grades = np.array([bin(a).count("1") for a in range(size)])
        self.rev = np.where((grades * (grades - 1) // 2) % 2, -1.0, 1.0)
        self.types = model.build(spec_mod.load(spec_path)).types

    @property
    def size(self) -> int:
        return self.ref.size

    def basis(self, type_name: str) -> np.ndarray:
        """(k, 2^n): row c is the c-th component's blade (with its orientation) as a multivector."""
        return np.array([self.ref.blade(c.factors) for c in self.types[type_name].components])

    def embed(self, type_name: str, x: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(x @ self.basis(type_name))

    def extract(self, type_name: str, dense: np.ndarray) -> np.ndarray:
        rows = self.basis(type_name)
        bitmaps = [c.bitmap for c in self.types[type_name].components]
        return dense[:, bitmaps] / rows[np.arange(len(bitmaps)), bitmaps]

    def product(self, x: np.ndarray, y: np.ndarray, out: np.ndarray) -> np.ndarray:
        """out = x y row by row; a single row of x or y is used for every row."""
        n = out.shape[0]
        for start in range(0, n, CHUNK):
            stop = min(start + CHUNK, n)
            out[start:stop] = np.einsum("ni,ijk,nk->nj", rows(x, start, stop), self.T,
                                        rows(y, start, stop), optimize=PATH)
        return out

    def sandwich(self, v: np.ndarray, x: np.ndarray, out: np.ndarray,
                 scratch: np.ndarray) -> np.ndarray:
        """out = v x ~v row by row, through `scratch` for v x."""
        self.product(v, x, scratch)
        return self.product(scratch, v * self.rev, out)


def rows(x: np.ndarray, start: int, stop: int) -> np.ndarray:
    """Rows start:stop of x, or its single row repeated (a broadcast view)."""
    if x.shape[0] == 1:
        return np.broadcast_to(x, (stop - start, x.shape[1]))
    return x[start:stop]
