"""Resolve a validated `Spec` against its algebra: blade names, types and kernel requests.

This is where the spec's names meet the mathematics: preferred blade names fix orientations,
types become ordered `TypeDef`s of components, and every kernel's operation, argument types,
result type and grade list are checked, each failure located at its key and line.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass

from .algebra import Algebra, NameError_, canonical_key
from .ir import TypeDef
from .ops import CATALOGUE
from .spec import KernelSpec, Spec, TypeSpec


@dataclass(frozen=True)
class Model:
    spec: Spec
    algebra: Algebra
    types: dict          # name -> TypeDef, in declaration order


def build(spec: Spec) -> Model:
    algebra = Algebra(spec.name, spec.basis, spec.metric)
    for i, name in enumerate(spec.blade_names):
        try:
            algebra.add_preferred(name)
        except NameError_ as exc:
            raise spec.error(f"algebra.blades[{i}]", str(exc)) from None
    types = {t.name: _type(spec, algebra, t) for t in spec.types}
    model = Model(spec, algebra, types)
    for k in spec.kernels:
        check_kernel(model, k)
    return model


def _type(spec: Spec, algebra: Algebra, t: TypeSpec) -> TypeDef:
    if t.grades is not None:
        comps = _grade_components(spec, algebra, t)
    else:
        comps = _blade_components(spec, algebra, t)
    seen: dict[str, str] = {}
    for c in comps:
        if c.ident in seen:
            raise spec.error(f"{t.key}", f"blades {seen[c.ident]!r} and {c.name!r} both become the "
                                         f"identifier {c.ident!r}; rename a basis vector")
        seen[c.ident] = c.name
    return TypeDef(t.name, tuple(comps))


def _grade_components(spec: Spec, algebra: Algebra, t: TypeSpec):
    seen = set()
    for i, g in enumerate(t.grades):
        if not 0 <= g <= algebra.n:
            raise spec.error(f"{t.key}.grades[{i}]", f"grade {g} does not exist in a "
                                                    f"{algebra.n}-dimensional algebra (0..{algebra.n})")
        if g in seen:
            raise spec.error(f"{t.key}.grades[{i}]", f"grade {g} is listed twice")
        seen.add(g)
    bitmaps = [b for g in sorted(seen) for b in algebra.grade_bitmaps(g)]
    return [algebra.component(b) for b in sorted(bitmaps, key=canonical_key)]


def _blade_components(spec: Spec, algebra: Algebra, t: TypeSpec):
    comps, seen = [], {}
    for i, name in enumerate(t.blades):
        key = f"{t.key}.blades[{i}]"
        try:
            comp = algebra.lookup(name)
        except NameError_ as exc:
            raise spec.error(key, str(exc)) from None
        if comp.bitmap in seen:
            raise spec.error(key, f"blade {name!r} is listed twice (also at blades[{seen[comp.bitmap]}])")
        seen[comp.bitmap] = i
        comps.append(comp)
    return comps


def suggest(name: str, options) -> str:
    close = difflib.get_close_matches(name, list(options), n=1, cutoff=0.5)
    return f" (did you mean {close[0]!r}?)" if close else ""


def check_kernel(model: Model, k: KernelSpec) -> None:
    spec = model.spec
    if k.op not in CATALOGUE:
        raise spec.error(f"{k.key}.op", f"unknown operation {k.op!r}{suggest(k.op, CATALOGUE)}; "
                                        f"operations: {', '.join(CATALOGUE)}")
    op = CATALOGUE[k.op]
    if len(k.args) != op.arity:
        raise spec.error(f"{k.key}.args", f"{k.op!r} takes {op.arity} argument"
                                          f"{'s' if op.arity > 1 else ''}, got {len(k.args)}")
    for i, a in enumerate(k.args):
        if a not in model.types:
            raise spec.error(f"{k.key}.args[{i}]", f"unknown type {a!r}{suggest(a, model.types)}")
    if k.result is not None and k.result not in model.types:
        raise spec.error(f"{k.key}.result", f"unknown type {k.result!r}{suggest(k.result, model.types)}")
    for key, _ in k.options:
        if k.op != "up":
            raise spec.error(f"{k.key}.{key}", f"key {key!r} only applies to op 'up'")
    if op.nondegenerate and model.algebra.degenerate:
        raise spec.error(f"{k.key}.op", f"{k.op!r} needs a non-degenerate metric, but the metric of "
                                        f"{spec.name!r} is degenerate (its determinant is 0); use "
                                        f"'complement' / 'uncomplement', which are metric-free")
    for i, g in enumerate(k.grades or ()):
        if not 0 <= g <= model.algebra.n:
            raise spec.error(f"{k.key}.grades[{i}]", f"grade {g} does not exist (0..{model.algebra.n})")
