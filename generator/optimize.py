"""Turn a kernel's exact formulas into straight-line code, choosing the cheapest equivalent form.

Forms are compared by counted operations (DESIGN section 5: a product of two variables, or of a
variable and a constant other than +-1, is a multiply; an addition or subtraction is an add;
negation is free).  For bilinear products the candidates are the expanded sum of products and
the form that groups terms sharing a coefficient magnitude (2ab + 2cd -> 2(ab + cd)).  A
bilinear product has no common subexpressions across outputs (every term a_i b_j is distinct),
so common-subexpression elimination is not run for it; the manifest lists what was applied.
"""
from __future__ import annotations

from dataclasses import replace
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


def _term_mul(t) -> int:
    return max(len(t.factors) - 1, 0) + (abs(t.coef) != 1 and bool(t.factors))


def expanded_counts(fm: Formula) -> Counts:
    """count(expanded(fm)), computed from the terms without building the tree."""
    return Counts(mul=sum(_term_mul(t) for t in fm.terms), add=max(len(fm.terms) - 1, 0))


def grouped_counts(fm: Formula) -> Counts:
    groups: dict = {}
    for t in fm.terms:
        groups.setdefault(abs(t.coef), []).append(t)
    mul, add, parts = 0, 0, 0
    for mag, ts in groups.items():
        if mag == 1 or len(ts) == 1:
            mul, parts = mul + sum(_term_mul(t) for t in ts), parts + len(ts)
        else:
            inner = sum(max(len(t.factors) - 1, 0) for t in ts)
            mul, add, parts = mul + inner + 1, add + len(ts) - 1, parts + 1
    return Counts(mul=mul, add=add + max(parts - 1, 0))


FORM_COUNTS = {"expanded": expanded_counts, "grouped": grouped_counts}


def _cost(c: Counts) -> tuple:
    return (c.mul + c.add + c.div, c.mul)


def optimize(kernel: Kernel) -> Program:
    """The program of one kernel: per output, the cheapest form (ties go to the first form)."""
    per_form: dict[str, Counts] = {name: Counts() for name in FORMS}
    outputs, total, used = [], Counts(), set()
    for fm in kernel.formulas:
        costs = {name: counter(fm) for name, counter in FORM_COUNTS.items()}
        for name, c in costs.items():
            per_form[name] = per_form[name] + c
        name = min(costs, key=lambda n: _cost(costs[n]))
        used.add(name)
        outputs.append(Assignment(fm.comp, FORMS[name](fm)))
        total = total + costs[name]
    chosen = "grouped" if "grouped" in used and per_form["grouped"] != per_form["expanded"] else "expanded"
    applied = ("group-coefficients",) if chosen == "grouped" else ()
    return Program(temps=(), outputs=tuple(outputs), counts=total, form=chosen,
                   forms=tuple(per_form.items()), applied=applied)


# --- shared products, sympy CSE, the sandwich's two forms ---------------------------------

def inline(node, env: dict):
    """The tree with temporaries (Var names in env) replaced by their expressions."""
    if isinstance(node, Var):
        return inline(env[node.name], env) if node.name in env else node
    if isinstance(node, Prod):
        return Prod(tuple(inline(f, env) for f in node.factors))
    if isinstance(node, Sum):
        return Sum(tuple((s, inline(t, env)) for s, t in node.terms))
    if isinstance(node, Div):
        return Div(inline(node.num, env), inline(node.den, env))
    if isinstance(node, Call):
        return Call(node.fn, tuple(inline(a, env) for a in node.args))
    return node


def math_text(node) -> str:
    """Canonical text of a tree for the manifest: `a.e12`, exact rationals."""
    from .emit.printer import Printer, Syntax
    from .manifest import coef_text
    text = Printer(Syntax(coef_text)).expr(node)
    import re
    return re.sub(r"\b([ab])_(\w+)", r"\1.\2", text)


def shared_products(formulas, prefix: str = "q"):
    """Products of two or more factors used more than once become temporaries `q_<k>`."""
    from collections import Counter
    from .ir import Factor, Term
    uses = Counter(t.factors for fm in formulas for t in fm.terms if len(t.factors) >= 2)
    shared = sorted(m for m, n in uses.items() if n >= 2)
    index = {m: i for i, m in enumerate(shared)}
    temps = [Assignment(f"{prefix}_{i}", Prod(tuple(Var(var_name(f)) for f in m)))
             for i, m in enumerate(shared)]
    def rewrite(t):
        if t.factors in index:
            return Term(t.coef, (Factor(prefix, str(index[t.factors])),))
        return t
    new = [Formula(fm.comp, tuple(rewrite(t) for t in fm.terms)) for fm in formulas]
    return temps, new


def best_tree(fm: Formula):
    candidates = [build(fm) for build in FORMS.values()]
    return min(candidates, key=lambda e: (count(e).mul + count(e).add, count(e).mul))


def program_cost(temps, outputs) -> Counts:
    return sum((count(a.expr) for a in list(temps) + list(outputs)), Counts())


def matrix_form(kernel: Kernel) -> tuple[list, list]:
    """Temps: shared products of `a`, then the matrix entries m<r>_<c>; outputs: M b."""
    used = {f.comp for fm in kernel.formulas for t in fm.terms for f in t.factors if f.arg == "b"}
    b_comps = [c for c in kernel.arg_fields[1] if c in used]
    entries = []
    for r, fm in enumerate(kernel.formulas):
        for c in b_comps:
            terms = tuple(without_b(t, c) for t in fm.terms if b_component(t) == c)
            entries.append(Formula(f"m{r}_{c}", terms))
    temps, entries = shared_products([e for e in entries if e.terms])
    temps += [Assignment(e.comp, best_tree(e)) for e in entries]
    live = {e.comp for e in entries}
    outputs = []
    for r, fm in enumerate(kernel.formulas):
        terms = [(1, Prod((Var(f"m{r}_{c}"), Var(f"b_{c}")))) for c in b_comps if f"m{r}_{c}" in live]
        outputs.append(Assignment(fm.comp, _sum(terms)))
    return temps, outputs


def b_component(term) -> str | None:
    return next((f.comp for f in term.factors if f.arg == "b"), None)


def without_b(term, comp: str):
    from .ir import Term
    factors = list(term.factors)
    factors.remove(next(f for f in factors if f.arg == "b" and f.comp == comp))
    return Term(term.coef, tuple(factors))


def cse_form(kernel: Kernel) -> tuple[list, list]:
    """The direct form after sympy's common-subexpression elimination."""
    import sympy
    syms: dict[str, sympy.Symbol] = {}
    def sym(f):
        name = var_name(f)
        return syms.setdefault(name, sympy.Symbol(name))
    exprs = [sympy.Add(*[sympy.Rational(t.coef.numerator, t.coef.denominator) *
                         sympy.Mul(*[sym(f) for f in t.factors]) for t in fm.terms])
             for fm in kernel.formulas]
    repl, reduced = sympy.cse(exprs, symbols=sympy.numbered_symbols("c_"), order="none")
    temps = [Assignment(str(s), from_sympy(e)) for s, e in repl]
    outputs = [Assignment(fm.comp, from_sympy(e)) for fm, e in zip(kernel.formulas, reduced)]
    return temps, outputs


def from_sympy(expr):
    """A sympy polynomial expression as an expression tree."""
    import sympy
    if expr.is_Symbol:
        return Var(expr.name)
    if expr.is_Rational:
        return Num(Fraction(int(expr.p), int(expr.q)))
    if expr.is_Add:
        terms = []
        for arg in sympy.Add.make_args(expr):
            coef, rest = arg.as_coeff_Mul()
            node = from_sympy(rest) if coef in (1, -1) else from_sympy(abs(coef) * rest)
            terms.append((-1 if coef < 0 else 1, node))
        return Sum(tuple(terms))
    if expr.is_Mul:
        coef, rest = expr.as_coeff_Mul()
        factors = [from_sympy(f) for f in sympy.Mul.make_args(rest)]
        if coef != 1:
            factors.insert(0, Num(Fraction(int(coef.p), int(coef.q))))
        flat = []
        for f in factors:
            flat.extend(f.factors if isinstance(f, Prod) else (f,))
        return Prod(tuple(flat))
    if expr.is_Pow and expr.exp.is_Integer and expr.exp > 0:
        return Prod(tuple(from_sympy(expr.base) for _ in range(int(expr.exp))))
    raise TypeError(f"cannot convert {expr!r}")


def sandwich_kernel(kernel: Kernel) -> Kernel:
    forms = {"direct-cse": cse_form(kernel), "matrix": matrix_form(kernel)}
    costs = {name: program_cost(*f) for name, f in forms.items()}
    chosen = min(costs, key=lambda n: (costs[n].mul + costs[n].add, costs[n].mul))
    temps, outputs = forms[chosen]
    program = Program(tuple(temps), tuple(outputs), costs[chosen], chosen,
                      tuple(costs.items()), ("cse",) if chosen == "direct-cse" else ("shared-products",))
    mt, mo = forms["matrix"]
    one = Program(tuple(mt), tuple(mo), costs["matrix"], "matrix", (), ("shared-products",))
    return replace(kernel, program=program, one_to_many=one)


def shared_kernel(kernel: Kernel) -> Kernel:
    """Products of `a` repeated across outputs computed once (sandwich_matrix)."""
    temps, formulas = shared_products(kernel.formulas)
    outputs = [Assignment(fm.comp, best_tree(fm)) for fm in formulas]
    cost = program_cost(temps, outputs)
    program = Program(tuple(temps), tuple(outputs), cost, "shared-products",
                      (("shared-products", cost),), ("shared-products",) if temps else ())
    return replace(kernel, program=program)


def optimize_kernel(kernel: Kernel) -> Kernel:
    if kernel.program is not None:
        return kernel
    if kernel.op == "sandwich":
        return sandwich_kernel(kernel)
    if kernel.op == "sandwich_matrix":
        return shared_kernel(kernel)
    return replace(kernel, program=optimize(kernel))


def signed(node) -> tuple[int, object]:
    """(sign, node without leading negations): -x * y -> (-1, x*y); sums of one term unwrapped."""
    if isinstance(node, Num):
        return (-1 if node.value < 0 else 1), Num(abs(node.value))
    if isinstance(node, Prod):
        sign, factors = 1, []
        for f in node.factors:
            s, g = signed(f)
            sign *= s
            if not (isinstance(g, Num) and g.value == 1):
                factors.append(g)
        if not factors:
            return sign, Num(Fraction(1))
        return sign, factors[0] if len(factors) == 1 else Prod(tuple(factors))
    if isinstance(node, Sum):
        terms = [(s * t_s, t) for s, term in node.terms for t_s, t in [signed(term)]]
        if len(terms) == 1:
            return terms[0]
        return 1, Sum(tuple(terms))
    if isinstance(node, Div):
        s1, num = signed(node.num)
        s2, den = signed(node.den)
        return s1 * s2, Div(num, den)
    if isinstance(node, Call):
        return 1, Call(node.fn, tuple(tidy(a) for a in node.args))
    return 1, node


def tidy(node):
    """The node with signs pulled to the front of each product and sum term."""
    sign, body = signed(node)
    return body if sign > 0 else Sum(((-1, body),))
