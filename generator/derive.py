"""Derive the exact sparse formulas of each kernel (the kernel IR).

Inputs are symbolic multivectors: for each component of an argument type, one variable times the
component's orientation sign on its canonical blade.  An operation combines only the blade pairs
of the declared types — |A|·|B| pairs, never 2^n — and each output component is an exact
polynomial with rational coefficients.  Polynomials are sparse dicts from monomials (sorted
tuples of variable indices) to Fractions during accumulation, which is ten times faster than
multiplying ring elements term by term; `to_ring` gives the same polynomials as elements of a
sympy sparse ring (`sympy.polys.rings.ring` over QQ) for symbolic checks.  Components whose
polynomial is zero are structural zeros and are pruned; the result type is then matched as
DESIGN section 4 says.
"""
from __future__ import annotations

from dataclasses import replace
from fractions import Fraction

from .algebra import Algebra, canonical_key, popcount
from .ir import Factor, Formula, Kernel, Term, TypeDef
from .model import Model
from .ops import CATALOGUE, Operation
from .spec import KernelSpec

Poly = dict          # monomial (tuple of variable indices, sorted) -> Fraction
MV = dict            # canonical bitmap -> Poly


class Variables:
    """The input variables of one kernel, in argument order then component order."""

    def __init__(self, args: list[tuple[str, TypeDef]]):
        self.factors: list[Factor] = []
        self.mvs: list[MV] = []
        for arg, t in args:
            mv: MV = {}
            for c in t.components:
                mv[c.bitmap] = {(len(self.factors),): c.sign}
                self.factors.append(Factor(arg, c.ident))
            self.mvs.append(mv)


def _add_into(acc: Poly, poly: Poly, scale: Fraction) -> None:
    for m, c in poly.items():
        v = acc.get(m, 0) + c * scale
        if v:
            acc[m] = v
        else:
            acc.pop(m, None)


def poly_mul(p: Poly, q: Poly) -> Poly:
    if len(p) == 1 and len(q) == 1:          # the common case: two single terms
        (m1, c1), = p.items()
        (m2, c2), = q.items()
        return {tuple(sorted(m1 + m2)): c1 * c2}
    out: Poly = {}
    for m1, c1 in p.items():
        for m2, c2 in q.items():
            m = tuple(sorted(m1 + m2))
            v = out.get(m, 0) + c1 * c2
            if v:
                out[m] = v
            else:
                out.pop(m, None)
    return out


class PairStats:
    """Why blade pairs contributed nothing (for the structurally-zero error message)."""

    def __init__(self):
        self.pairs = self.grade_rule = self.metric_zero = 0

    def count(self, nonzero: bool, kept: bool, grade_ok: bool) -> None:
        self.pairs += 1
        if not kept and (nonzero or not grade_ok):
            self.grade_rule += 1
        elif not nonzero:
            self.metric_zero += 1


def bilinear(alg: Algebra, keep, A: MV, B: MV, stats: PairStats | None = None) -> MV:
    """sum over blade pairs (a, b) of A_a B_b * (grade-filtered e_a e_b)."""
    out: MV = {}
    for a, pa in A.items():
        r = popcount(a)
        for b, pb in B.items():
            terms = alg.product(a, b)
            kept = [(c, coef) for c, coef in terms if keep(r, popcount(b), popcount(c))]
            if stats is not None:
                stats.count(bool(terms), bool(kept), keep(r, popcount(b), popcount(a ^ b)))
            if kept:
                prod = poly_mul(pa, pb)
                for c, coef in kept:
                    _add_into(out.setdefault(c, {}), prod, coef)
    return out


def commutator(alg: Algebra, A: MV, B: MV, stats=None) -> MV:
    every = CATALOGUE["geometric"].keep
    ab, ba = bilinear(alg, every, A, B, stats), bilinear(alg, every, B, A)
    return linear(ab, ba, Fraction(-1), Fraction(1, 2))


def linear(A: MV, B: MV, sign, scale=1) -> MV:
    out: MV = {}
    for k, p in A.items():
        _add_into(out.setdefault(k, {}), p, scale)
    for k, p in B.items():
        _add_into(out.setdefault(k, {}), p, scale * sign)
    return out


def grade_sign(op: Operation, A: MV) -> MV:
    return {k: {m: c * op.sign(popcount(k)) for m, c in p.items()} for k, p in A.items()}


def _geometric(alg: Algebra, A: MV, B: MV, stats=None) -> MV:
    return bilinear(alg, CATALOGUE["geometric"].keep, A, B, stats)


def _outer(alg: Algebra, A: MV, B: MV, stats=None) -> MV:
    return bilinear(alg, CATALOGUE["outer"].keep, A, B, stats)


def _rules() -> dict:
    """kind -> rule(alg, op, mvs, stats) returning the result multivector."""
    from . import duality as d
    from . import versor as v
    return {
        "bilinear": lambda alg, op, m, st: bilinear(alg, op.keep, m[0], m[1], st),
        "commutator": lambda alg, op, m, st: commutator(alg, m[0], m[1], st),
        "linear": lambda alg, op, m, st: linear(m[0], m[1], op.linear_sign),
        "grade_sign": lambda alg, op, m, st: grade_sign(op, m[0]),
        "complement": lambda alg, op, m, st: d.complement(alg, m[0]),
        "uncomplement": lambda alg, op, m, st: d.uncomplement(alg, m[0]),
        "regressive": lambda alg, op, m, st: d.uncomplement(
            alg, _outer(alg, d.complement(alg, m[0]), d.complement(alg, m[1]), st)),
        "dual": lambda alg, op, m, st: _geometric(alg, m[0], d.dual_factor(alg), st),
        "undual": lambda alg, op, m, st: _geometric(alg, m[0], d.undual_factor(alg), st),
        "sandwich": lambda alg, op, m, st: v.sandwich(alg, m[0], m[1], st),
        "norm_squared": lambda alg, op, m, st: v.norm_squared(alg, m[0], st),
    }


def apply(alg: Algebra, op: Operation, mvs: list[MV], stats: PairStats | None = None) -> MV:
    rules = _rules()
    if op.kind not in rules:
        raise AssertionError(f"no derivation rule for kind {op.kind!r}")
    return rules[op.kind](alg, op, mvs, stats)


def prune(mv: MV, grades: tuple[int, ...] | None) -> MV:
    """Drop structural zeros (and grades not asked for)."""
    return {k: p for k, p in mv.items() if p and (grades is None or popcount(k) in grades)}


def derive(model: Model, ks: KernelSpec, extra_types: dict) -> tuple[Kernel, tuple[TypeDef, ...]]:
    """The kernel for one spec entry, and the result types it inferred (if any)."""
    from . import versor
    alg, op = model.algebra, CATALOGUE[ks.op]
    arg_names = ("a", "b")[:op.arity]
    arg_types = [model.types[t] for t in ks.args]
    variables = Variables(list(zip(arg_names, arg_types)))
    fields = tuple(tuple(c.ident for c in t.components) for t in arg_types)
    if op.kind in versor.SPECIAL:
        kernel, new_types = versor.SPECIAL[op.kind](model, ks, op, variables, extra_types)
        return replace(kernel, arg_fields=fields), tuple(t for t in new_types if t is not None)
    stats = PairStats()
    full = prune(apply(alg, op, variables.mvs, stats), None)
    mv = prune(full, ks.grades)
    if not mv:
        raise model.spec.error(ks.key, zero_message(ks, op, stats, sorted({popcount(k) for k in full})))
    result, new_type = match_result(model, ks, mv, extra_types)
    formulas = tuple(formula(c, mv.get(c.bitmap, {}), variables) for c in result.components)
    kernel = Kernel(name=ks.name, op=ks.op, args=tuple(ks.args), result=result.name,
                    formulas=formulas, arg_names=arg_names, summary=op.formula,
                    grades=ks.grades, arg_fields=fields)
    return kernel, (new_type,) if new_type is not None else ()


def formula(comp, poly: Poly, variables: Variables) -> Formula:
    terms = tuple(Term(coef * comp.sign, tuple(variables.factors[i] for i in m))
                  for m, coef in sorted(poly.items()))
    return Formula(comp.ident, terms)


def match_result(model: Model, ks: KernelSpec, mv, extra: dict,
                 name: str | None = None) -> tuple[TypeDef, TypeDef | None]:
    """The declared type for the blades of `mv` (a multivector or a set of bitmaps), or a new one."""
    blades = set(mv)
    if ks.result is not None:
        t = model.types[ks.result]
        missing = sorted(blades - set(t.bitmaps), key=canonical_key)
        if missing:
            names = ", ".join(model.algebra.component(b).name for b in missing)
            raise model.spec.error(f"{ks.key}.result",
                                   f"type {t.name!r} cannot hold the result: it lacks {names} "
                                   f"(add them to the type, or select grades with 'grades')")
        return t, None
    for t in list(model.types.values()) + list(extra.values()):
        if set(t.bitmaps) == blades:
            return t, None
    name = name or f"{ks.name}_result"
    if name in model.types:
        raise model.spec.error(ks.key, f"the inferred result type {name!r} clashes with a declared "
                                       "type; set 'result' explicitly")
    comps = tuple(model.algebra.component(b) for b in sorted(blades, key=canonical_key))
    t = TypeDef(name, comps, declared=False)
    return t, t


def zero_message(ks: KernelSpec, op: Operation, stats: PairStats, grades_left=()) -> str:
    """Why a kernel's result vanishes: the grade rule, null vectors, cancellation or `grades`."""
    head = f"the result of {op.name}({', '.join(ks.args)}) is structurally zero"
    if grades_left:
        return (f"{head} after 'grades' = {list(ks.grades)}: the result only has grade"
                f"{'s' if len(grades_left) > 1 else ''} {', '.join(map(str, grades_left))}. "
                "Change 'grades' or remove the kernel")
    why = []
    if stats.grade_rule:
        why.append(f"{stats.grade_rule} dropped by the grade rule of {op.name} ({op.formula})")
    if stats.metric_zero:
        why.append(f"{stats.metric_zero} vanish because they square a null basis vector")
    rest = stats.pairs - stats.grade_rule - stats.metric_zero
    if rest:
        why.append(f"{rest} cancel each other")
    plural = "pair" if stats.pairs == 1 else "pairs"
    detail = f": of {stats.pairs} blade {plural}, " + "; ".join(why) if stats.pairs else ""
    return f"{head}{detail}. Remove the kernel or change its types"


def to_ring(kernel: Kernel):
    """The kernel's formulas as elements of a sympy sparse polynomial ring over QQ."""
    from sympy import QQ
    from sympy.polys.rings import ring
    names = sorted({f"{f.arg}_{f.comp}" for fm in kernel.formulas for t in fm.terms for f in t.factors})
    if not names:
        names = ["_unused"]
    R, *gens = ring(",".join(names), QQ)
    index = {n: g for n, g in zip(names, gens)}
    polys = {}
    for fm in kernel.formulas:
        p = R.zero
        for t in fm.terms:
            m = R(QQ(t.coef.numerator, t.coef.denominator))
            for f in t.factors:
                m *= index[f"{f.arg}_{f.comp}"]
            p += m
        polys[fm.comp] = p
    return R, polys
