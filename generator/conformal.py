"""The conformal up-projection: a Euclidean vector x to the null vector up(x).

With a null origin o and a null point at infinity i (o.o = i.i = 0, o.i != 0) and x orthogonal to
both, up(x) = x + o + c (x.x) i with c = -1 / (2 o.i); then up(x) up(x) = x.x + 2 c (x.x)(o.i) = 0.
For the usual normalization o.i = -1 this is x + o + x.x i / 2 (Dorst, Fontijne & Mann, *Geometric
Algebra for Computer Science*, 2007, ch. 13).  The kernel names o and i with its `origin` and
`infinity` keys.
"""
from __future__ import annotations

from fractions import Fraction

from .derive import bilinear, formula, linear, match_result
from .ir import Kernel


def _basis_index(model, ks, key: str) -> int:
    name = ks.option(key)
    if name is None:
        raise model.spec.error(ks.key, f"'up' needs '{key}' = the name of a null basis vector "
                                       "(e.g. origin = \"eo\", infinity = \"ei\")")
    if name not in model.spec.basis:
        raise model.spec.error(f"{ks.key}.{key}", f"{name!r} is not a basis vector "
                                                  f"(basis: {', '.join(model.spec.basis)})")
    return model.spec.basis.index(name)


def _check(model, ks, o: int, i: int) -> Fraction:
    g = model.algebra.metric
    if g[o][o] or g[i][i] or not g[o][i]:
        raise model.spec.error(ks.key, "'up' needs origin and infinity to be null vectors "
                                       f"with a non-zero inner product (here o.o = {g[o][o]}, "
                                       f"i.i = {g[i][i]}, o.i = {g[o][i]})")
    t = model.types[ks.args[0]]
    for c in t.components:
        bad = len(c.factors) != 1 or any(g[c.factors[0]][k] for k in (o, i))
        if bad:
            raise model.spec.error(f"{ks.key}.args[0]", f"'up' takes Euclidean vectors orthogonal "
                                                        f"to origin and infinity; {c.name!r} is not")
    return g[o][i]


def derive_up(model, ks, op, variables, extra):
    o, i = _basis_index(model, ks, "origin"), _basis_index(model, ks, "infinity")
    oi = _check(model, ks, o, i)
    X = variables.mvs[0]
    square = bilinear(model.algebra, lambda r, s, g: g == 0, X, X).get(0, {})
    c = Fraction(-1) / (2 * oi)
    extra_part = {1 << o: {(): Fraction(1)}, 1 << i: {m: v * c for m, v in square.items()}}
    mv = {k: p for k, p in linear(X, extra_part, Fraction(1)).items() if p}
    result, new_type = match_result(model, ks, mv, extra)
    formulas = tuple(formula(comp, mv.get(comp.bitmap, {}), variables) for comp in result.components)
    kernel = Kernel(name=ks.name, op=ks.op, args=tuple(ks.args), result=result.name,
                    formulas=formulas, arg_names=("a",), summary=op.formula, grades=None,
                    options=ks.options)
    return kernel, (new_type,)


