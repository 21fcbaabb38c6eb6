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
from .names import (c_names, c_problem, clash, identifier_problem, python_names, python_problem,
                    shown)
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
        if identifier_problem(name.replace("^", "_")):
            raise spec.error(f"algebra.blades[{i}]", identifier_problem(name.replace("^", "_")))
    types = {t.name: _type(spec, algebra, t) for t in spec.types}
    model = Model(spec, algebra, types)
    for k in spec.kernels:
        check_kernel(model, k)
    check_names(model)
    return model


def check_names(model: Model, inferred: tuple[tuple[TypeDef, str], ...] = ()) -> None:
    """Every identifier the targets emit is valid and unique per target; `inferred` holds the
    (type, kernel key) of each result type the derivation added."""
    spec = model.spec
    for t, key in inferred:
        check_components(spec, t, key)
    for k in spec.kernels:
        if identifier_problem(k.name):
            raise spec.error(k.key, f"the default kernel name cannot be used: "
                                    f"{identifier_problem(k.name)}; give the kernel a 'name'")
    types = {t.name: t.key for t in spec.types} | {t.name: key for t, key in inferred}
    kernels = {k.name: k.key for k in spec.kernels}
    fixed = {k.name for k in spec.kernels if k.op == "sandwich"}
    for target, rows, problem in (("C", c_names(spec.name, types, kernels, fixed), c_problem),
                                  ("Python", python_names(kernels), python_problem)):
        found = clash(target, rows, problem)
        if found:
            raise spec.error(*found)


def check_components(spec: Spec, t: TypeDef, key: str) -> None:
    """Each component's identifier is valid and used once in the type."""
    seen: dict[str, str] = {}
    for c in t.components:
        if identifier_problem(c.ident):
            raise spec.error(key, f"blade {c.name!r} becomes the identifier {c.ident!r} in type "
                                  f"{t.name!r}: {identifier_problem(c.ident)}; rename a basis vector "
                                  "or give the blade another name in [algebra] blades")
        if c.ident in seen:
            raise spec.error(key, f"blades {seen[c.ident]!r} and {c.name!r} both become the "
                                  f"identifier {c.ident!r}; rename a basis vector")
        seen[c.ident] = c.name


def _type(spec: Spec, algebra: Algebra, t: TypeSpec) -> TypeDef:
    if t.grades is not None:
        comps = _grade_components(spec, algebra, t)
    else:
        comps = _blade_components(spec, algebra, t)
    typedef = TypeDef(t.name, tuple(comps))
    check_components(spec, typedef, t.key)
    return typedef


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
        raise spec.error(f"{k.key}.op", f"unknown operation {shown(k.op)}"
                                        f"{suggest(k.op, CATALOGUE)}; "
                                        f"operations: {', '.join(CATALOGUE)}")
    op = CATALOGUE[k.op]
    if len(k.args) != op.arity:
        raise spec.error(f"{k.key}.args", f"{k.op!r} takes {op.arity} argument"
                                          f"{'s' if op.arity > 1 else ''}, got {len(k.args)}")
    for i, a in enumerate(k.args):
        if a not in model.types:
            raise spec.error(f"{k.key}.args[{i}]",
                             f"unknown type {shown(a)}{suggest(a, model.types)}")
    if k.result is not None and k.result not in model.types:
        raise spec.error(f"{k.key}.result",
                         f"unknown type {shown(k.result)}{suggest(k.result, model.types)}")
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
