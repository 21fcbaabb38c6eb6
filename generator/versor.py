"""Versor operations: sandwich, its matrix, norm, inverse and the closed-form exponential.

* `sandwich(V, X) = V X ~V` is derived as one polynomial map (quadratic in V, linear in X); its
  structural zeros cancel exactly (a motor applied to a point yields only the point's grade).
* `sandwich_matrix` returns that linear map's matrix M(V), row-major: out[r] = sum_c M[r][c] x[c],
  rows the components of the transformed type, columns those of X.
* `inverse` needs X ~X = s (a scalar), or s + p I with I I = 0 (the 3D projective motors); then
  X^-1 = ~X (s - p I) / s^2.  The generator proves the structure symbolically, or refuses.
* `exp` of B with B B = beta (a scalar) or beta + p I (I I = 0, I commutes with B):
  exp(B) = c + s B + (p/2) (s I + d I B) with c = exp_c(beta), s = exp_s(beta), d = exp_d(beta)
  (series identities: B^(2k) = beta^k + k beta^(k-1) p I; c' = s/2 and s' = d/2).  exp_c is cos or
  cosh of sqrt|beta|, exp_s is sin(t)/t or sinh(t)/t, chosen at run time by the sign of beta, with
  series near zero, so no division by zero at zero angle.
"""
from __future__ import annotations

from fractions import Fraction

from . import duality
from .derive import (CATALOGUE, MV, Variables, bilinear, formula, grade_sign, match_result,
                     prune, zero_message, PairStats)
from .ir import Assignment, Call, Component, Div, Formula, Kernel, Num, Prod, Program, Sum, TypeDef, Var
from .optimize import best_tree, count, expanded, inline, math_text, tidy

GEOMETRIC = CATALOGUE["geometric"].keep


def reverse(A: MV) -> MV:
    return grade_sign(CATALOGUE["reverse"], A)


def sandwich(alg, V: MV, X: MV, stats=None) -> MV:
    return bilinear(alg, GEOMETRIC, bilinear(alg, GEOMETRIC, V, X, stats), reverse(V))


def norm_squared(alg, A: MV, stats=None) -> MV:
    return bilinear(alg, lambda r, s, g: g == 0, A, reverse(A), stats)


# --- sandwich matrix ----------------------------------------------------------------------

def matrix_entries(rows: TypeDef, x_type: TypeDef, mv: MV, variables: Variables) -> list[Formula]:
    """Entry (r, c): the coefficient of x_c in output component r, a polynomial in V."""
    first_b = len(variables.factors) - len(x_type.components)
    entries = []
    for r, comp in enumerate(rows.components):
        split: dict[int, dict] = {}
        for m, coef in mv.get(comp.bitmap, {}).items():
            split.setdefault(m[-1] - first_b, {})[m[:-1]] = coef
        for c in range(len(x_type.components)):
            fm = formula(comp, split.get(c, {}), variables)
            entries.append(Formula(f"m{r}_{c}", fm.terms))
    return entries


def matrix_type(name: str, rows: TypeDef, cols: TypeDef) -> TypeDef:
    comps = tuple(Component(f"m{r}_{c}", f"m{r}_{c}", -1, (), 1)
                  for r in range(len(rows.components)) for c in range(len(cols.components)))
    return TypeDef(f"{name}_result", comps, declared=False)


def derive_matrix(model, ks, op, variables, extra):
    alg = model.algebra
    x_type = model.types[ks.args[1]]
    mv = prune(sandwich(alg, *variables.mvs), ks.grades)
    if not mv:
        raise model.spec.error(ks.key, zero_message(ks, op, PairStats()))
    rows, new_rows = match_result(model, ks, mv, extra, f"{ks.name}_rows")
    entries = matrix_entries(rows, x_type, mv, variables)
    mtype = matrix_type(ks.name, rows, x_type)
    kernel = Kernel(name=ks.name, op=ks.op, args=tuple(ks.args), result=mtype.name,
                    formulas=tuple(entries), arg_names=("a",), summary=op.formula,
                    grades=ks.grades, rows=rows.name)
    return kernel, (new_rows, mtype)


# --- trees from multivectors --------------------------------------------------------------

def tree(comp: Component, poly: dict, variables: Variables):
    return expanded(formula(comp, poly, variables))


def _scalar_tree(poly: dict, variables: Variables):
    return best_tree(formula(Component("s", "s", 0, (), 1), poly, variables))


def special_kernel(ks, op, result: TypeDef, temps, outputs: dict) -> Kernel:
    """A kernel whose program is built here (non-polynomial: inverse, exp)."""
    temps = [Assignment(t.target, tidy(t.expr)) for t in temps]
    env = {t.target: t.expr for t in temps}
    assigns = tuple(Assignment(c.ident, tidy(outputs.get(c.ident, Num(Fraction(0)))))
                    for c in result.components)
    formulas = tuple(Formula(a.target, (), math_text(inline(a.expr, env))) for a in assigns)
    total = sum((count(t.expr) for t in temps), count(Num(Fraction(0))))
    total = sum((count(a.expr) for a in assigns), total)
    program = Program(temps=tuple(temps), outputs=assigns, counts=total, form="closed-form",
                      forms=(("closed-form", total),), applied=())
    return Kernel(name=ks.name, op=ks.op, args=tuple(ks.args), result=result.name,
                  formulas=formulas, arg_names=("a",), summary=op.formula, grades=ks.grades,
                  program=program)


def _accumulate(out: dict, result: TypeDef, scale, mv: MV, variables: Variables) -> None:
    """out[comp] += scale * (mv's component, named)."""
    for comp in result.components:
        if mv.get(comp.bitmap):
            node = tree(comp, mv[comp.bitmap], variables)
            term = node if scale is None else Prod((scale, node))
            out[comp.ident] = Sum(((1, out[comp.ident]), (1, term))) if comp.ident in out else term


def _structure(model, ks, square: MV, what: str) -> bool:
    """True when `square` is s + p I with I I = 0; False when it is a scalar; else a spec error."""
    alg = model.algebra
    full = duality.full(alg)
    extra = sorted(b for b in square if b != 0)
    if not extra:
        return False
    if extra == [full] and duality.pseudoscalar_square(alg) == 0:
        return True
    names = ", ".join(alg.component(b).name for b in extra)
    raise model.spec.error(f"{ks.key}.args[0]", f"{ks.op} needs {what} to be a scalar (or a scalar "
                                                f"plus a null pseudoscalar), but for type "
                                                f"{ks.args[0]!r} it also has {names}")


# --- inverse ------------------------------------------------------------------------------

def derive_inverse(model, ks, op, variables, extra):
    alg, A = model.algebra, variables.mvs[0]
    square = prune(norm_full(alg, A), None)
    if not square.get(0):
        raise model.spec.error(ks.key, f"{ks.args[0]!r} has no scalar norm: a ~a has no scalar part")
    null = _structure(model, ks, square, "the norm a ~a")
    full = duality.full(alg)
    rev = reverse(A)
    temps = [Assignment("t0", _scalar_tree(square[0], variables)),
             Assignment("t1", Div(Num(Fraction(1)), Var("t0")))]
    parts: list[tuple] = [(Var("t1"), rev)]
    if null:     # X^-1 = ~X / s - ~X I (p / s^2)
        temps += [Assignment("t2", _scalar_tree(square[full], variables)),
                  Assignment("t3", Prod((Var("t2"), Var("t1"), Var("t1"))))]
        rev_i = prune(bilinear(alg, GEOMETRIC, rev, duality.constant(full, Fraction(-1))), None)
        parts.append((Var("t3"), rev_i))
    blades = set().union(*(mv for _, mv in parts))
    result, new_type = match_result(model, ks, blades, extra)
    outputs: dict = {}
    for scale, mv in parts:
        _accumulate(outputs, result, scale, mv, variables)
    return special_kernel(ks, op, result, temps, outputs), (new_type,)


def norm_full(alg, A: MV) -> MV:
    return bilinear(alg, GEOMETRIC, A, reverse(A))


# --- exponential --------------------------------------------------------------------------

def derive_exp(model, ks, op, variables, extra):
    alg, B = model.algebra, variables.mvs[0]
    square = prune(bilinear(alg, GEOMETRIC, B, B), None)
    null = _structure(model, ks, square, "the square a a")
    full = duality.full(alg)
    temps = [Assignment("t0", _scalar_tree(square.get(0, {}), variables)),
             Assignment("t1", Call("exp_c", (Var("t0"),))),
             Assignment("t2", Call("exp_s", (Var("t0"),)))]
    parts: list[tuple] = [(None, {0: {(): Fraction(1)}}, Var("t1")), (Var("t2"), B, None)]
    if null:
        half_p = {m: c / 2 for m, c in square[full].items()}
        temps += [Assignment("t3", _scalar_tree(half_p, variables)),
                  Assignment("t4", Call("exp_d", (Var("t0"),))),
                  Assignment("t5", Prod((Var("t3"), Var("t2")))),
                  Assignment("t6", Prod((Var("t3"), Var("t4"))))]
        ib = prune(bilinear(alg, GEOMETRIC, duality.constant(full, Fraction(1)), B), None)
        parts += [(None, {full: {(): Fraction(1)}}, Var("t5")), (Var("t6"), ib, None)]
    blades = set().union(*(mv for _, mv, _ in parts))
    result, new_type = match_result(model, ks, blades, extra)
    outputs: dict = {}
    for scale, mv, const in parts:
        if const is not None:
            _add_constant(outputs, result, mv, const)
        else:
            _accumulate(outputs, result, scale, mv, variables)
    return special_kernel(ks, op, result, temps, outputs), (new_type,)


def _add_constant(out: dict, result: TypeDef, mv: MV, node) -> None:
    """out[comp] += node for the (single, unit) blade of a constant multivector."""
    for comp in result.components:
        if comp.bitmap in mv:
            term = node if comp.sign == 1 else Prod((Num(Fraction(-1)), node))
            out[comp.ident] = Sum(((1, out[comp.ident]), (1, term))) if comp.ident in out else term


def _up(*args):
    from .conformal import derive_up
    return derive_up(*args)


SPECIAL = {"sandwich_matrix": derive_matrix, "inverse": derive_inverse, "exp": derive_exp, "up": _up}
