"""Turn a kernel's exact formulas into straight-line code, choosing the cheapest equivalent form.

Forms are compared by counted operations (DESIGN section 5: a product of two variables, or of a
variable and a constant other than +-1, is a multiply; an addition or subtraction is an add;
negation is free).  For bilinear products the candidates are the expanded sum of products and
the form that groups terms sharing a coefficient magnitude (2ab + 2cd -> 2(ab + cd)).  A
bilinear product has no common subexpressions across outputs (every term a_i b_j is distinct),
so common-subexpression elimination is not run for it; the manifest lists what was applied.
"""
from __future__ import annotations

from fractions import Fraction

from .ir import Assignment, Call, Counts, Div, Formula, Kernel, Num, Prod, Program, Sum, Var


def var_name(factor) -> str:
    return f"{factor.arg}_{factor.comp}"


def count(node) -> Counts:
    """Operation counts of an expression tree."""
    if isinstance(node, (Var, Num)):
        return Counts()
    if isinstance(node, Prod):
        inner = sum((count(f) for f in node.factors), Counts())
        real = [f for f in node.factors if not (isinstance(f, Num) and abs(f.value) == 1)]
        return inner + Counts(mul=max(len(real) - 1, 0))
    if isinstance(node, Sum):
        inner = sum((count(t) for _, t in node.terms), Counts())
        return inner + Counts(add=max(len(node.terms) - 1, 0))
    if isinstance(node, Div):
        return count(node.num) + count(node.den) + Counts(div=1)
    if isinstance(node, Call):
        return sum((count(a) for a in node.args), Counts(calls=1))
    raise TypeError(f"cannot count {node!r}")


def _monomial(term, scale: Fraction = Fraction(1)):
    """(sign, node) for coef*factors/scale."""
    coef = term.coef / scale
    factors = tuple(Var(var_name(f)) for f in term.factors)
    sign = -1 if coef < 0 else 1
    if abs(coef) != 1 or not factors:
        factors = (Num(abs(coef)),) + factors
    node = factors[0] if len(factors) == 1 else Prod(factors)
    return sign, node


def _sum(terms: list):
    if not terms:
        return Num(Fraction(0))
    if len(terms) == 1 and terms[0][0] == 1:
        return terms[0][1]
    return Sum(tuple(terms))


def expanded(formula: Formula):
    return _sum([_monomial(t) for t in formula.terms])


def grouped(formula: Formula):
    """Terms sharing a coefficient magnitude c != 1 are summed first, then scaled once."""
    groups: dict[Fraction, list] = {}
    for t in formula.terms:
        groups.setdefault(abs(t.coef), []).append(t)
    parts = []
    for mag in sorted(groups, key=lambda m: (m != 1, m)):
        ts = groups[mag]
        if mag == 1 or len(ts) == 1:
            parts.extend(_monomial(t) for t in ts)
        else:
            inner = _sum([_monomial(t, mag) for t in ts])
            parts.append((1, Prod((Num(mag), inner))))
    return _sum(parts)


FORMS = {"expanded": expanded, "grouped": grouped}


def optimize(kernel: Kernel) -> Program:
    """The program of one kernel: per output, the cheapest form (ties go to the first form)."""
    per_form: dict[str, Counts] = {name: Counts() for name in FORMS}
    outputs, total, used = [], Counts(), set()
    for fm in kernel.formulas:
        candidates = [(name, build(fm)) for name, build in FORMS.items()]
        costs = [(name, expr, count(expr)) for name, expr in candidates]
        for name, _, c in costs:
            per_form[name] = per_form[name] + c
        name, expr, c = min(costs, key=lambda x: (x[2].mul + x[2].add + x[2].div, x[2].mul))
        used.add(name)
        outputs.append(Assignment(fm.comp, expr))
        total = total + c
    chosen = "grouped" if "grouped" in used and per_form["grouped"] != per_form["expanded"] else "expanded"
    applied = ("group-coefficients",) if chosen == "grouped" else ()
    return Program(temps=(), outputs=tuple(outputs), counts=total, form=chosen,
                   forms=tuple(per_form.items()), applied=applied)
