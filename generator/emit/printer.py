"""Print expression trees (`generator.ir`) as source text, with per-target differences in tables.

Numbers are printed with sympy's code printers (`PythonCodePrinter`, `C99CodePrinter`), which
know each language's literal syntax; the sum-of-products layout is printed here, because a sympy
`Add` of thousands of terms costs seconds to build and print while these trees print in
milliseconds.  Long sums are wrapped at term boundaries so formulas stay readable in a diff.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

from ..ir import Call, Div, Num, Prod, Sum, Var

WIDTH = 96


@dataclass(frozen=True)
class Syntax:
    """What differs between targets when printing an expression."""

    number: object                          # Fraction -> str
    functions: dict = field(default_factory=dict)   # tree function name -> target spelling
    needs: dict = field(default_factory=dict)       # tree function name -> import/include it needs
    constant: object = None                 # Fraction -> str for a result that is a bare number


def python_number(value: Fraction) -> str:
    from sympy import Rational
    from sympy.printing.pycode import PythonCodePrinter
    if value.denominator == 1:
        return str(value.numerator)
    if value.denominator & (value.denominator - 1) == 0:      # exact in binary: a float literal
        return repr(value.numerator / value.denominator)
    return "(" + PythonCodePrinter().doprint(Rational(value.numerator, value.denominator)) + ")"


def python_float(value: Fraction) -> str:
    """A Python literal whose value is a float: 1.0, 0.5, (1/3) (true division)."""
    return f"{value.numerator}.0" if value.denominator == 1 else python_number(value)


def c_double(value: Fraction) -> str:
    """A C double literal without a cast: 2.0, 0.5, (1.0/24.0)."""
    from sympy import Rational
    from sympy.printing.c import C99CodePrinter
    if value.denominator == 1:
        return f"{value.numerator}.0"
    if value.denominator & (value.denominator - 1) == 0:
        return repr(value.numerator / value.denominator)
    return "(" + C99CodePrinter().doprint(Rational(value.numerator, value.denominator)) + ")"


def c_number(real: str):
    """Number literals cast to the header's scalar type, so float builds stay in float."""
    def number(value: Fraction) -> str:
        return f"(({real}){c_double(value)})"
    return number


class Printer:
    """Prints nodes for one target; records the functions it used in `used`."""

    def __init__(self, syntax: Syntax):
        self.syntax = syntax
        self.used: set[str] = set()

    def expr(self, node, prec: int = 0) -> str:
        if isinstance(node, Var):
            return node.name
        if isinstance(node, Num):
            text = self.syntax.number(abs(node.value))
            return f"-{text}" if node.value < 0 and prec == 0 else (
                f"(-{text})" if node.value < 0 else text)
        if isinstance(node, Prod):
            text = "*".join(self.expr(f, 2) for f in node.factors)
            return f"({text})" if prec > 2 else text
        if isinstance(node, Sum):
            text = self._sum(node)
            return f"({text})" if prec > 1 else text
        if isinstance(node, Div):
            text = f"{self.expr(node.num, 2)}/{self.expr(node.den, 3)}"
            return f"({text})" if prec > 2 else text
        if isinstance(node, Call):
            self.used.add(node.fn)
            name = self.syntax.functions.get(node.fn, node.fn)
            return f"{name}({', '.join(self.expr(a) for a in node.args)})"
        raise TypeError(f"cannot print {node!r}")

    def _sum(self, node: Sum) -> str:
        return "".join(self.piece(i, sign, term) for i, (sign, term) in enumerate(node.terms))

    def piece(self, i: int, sign: int, term) -> str:
        """Term i of a sum with its operator: "a*b", "-a*b", " + a*b" or " - a*b"."""
        body = self.expr(term, 2)
        if i == 0:
            return f"-{body}" if sign < 0 else body
        return f" - {body}" if sign < 0 else f" + {body}"

    def result(self, node, indent: str) -> str:
        """A result component: `wrapped`, except that a bare number prints with the syntax's
        `constant` when it has one (Python: 1.0, not 1, so every component is a float)."""
        if isinstance(node, Num) and self.syntax.constant is not None:
            text = self.syntax.constant(abs(node.value))
            return f"-{text}" if node.value < 0 else text
        return self.wrapped(node, indent)

    def wrapped(self, node, indent: str) -> str:
        """The expression, broken at top-level term boundaries when longer than WIDTH."""
        if not isinstance(node, Sum):
            return self.expr(node)
        lines, line = [], ""
        for i, (sign, term) in enumerate(node.terms):
            piece = self.piece(i, sign, term)
            if line and len(indent) + len(line) + len(piece) > WIDTH:
                lines.append(line)
                line = piece.lstrip()
            else:
                line += piece
        lines.append(line)
        return ("\n" + indent).join(lines)
