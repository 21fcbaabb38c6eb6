"""Plain data shared by the stages: load -> derive -> optimize -> emit.

Every stage hands the next one frozen dataclasses from this module, never TOML tables or sympy
objects.  The derivation produces a `Kernel` whose formulas are exact sums of `Term`s (rational
coefficient times a product of input components); the optimizer turns each kernel into a
`Program` of `Assignment`s over a tiny expression tree (`Var`, `Num`, `Prod`, `Sum`, `Div`, `Call`),
which the per-target printers in `generator.emit` print.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction


@dataclass(frozen=True)
class Component:
    """One component of a type: a blade by its name, bitmap and the order of its factors."""

    name: str                   # blade name as written in the spec ("e31", "e1^o", "s")
    ident: str                  # the name as an identifier ("e1_o")
    bitmap: int                 # bit i = basis vector i
    factors: tuple[int, ...]    # basis indices in the order of the name (orientation)
    sign: int                   # named blade = sign * canonical (ascending) blade


@dataclass(frozen=True)
class TypeDef:
    """An element type: an ordered list of components."""

    name: str
    components: tuple[Component, ...]
    declared: bool = True       # False for an inferred `<kernel>_result` type

    @property
    def bitmaps(self) -> tuple[int, ...]:
        return tuple(c.bitmap for c in self.components)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.components)


@dataclass(frozen=True, order=True)
class Factor:
    """An input component used in a formula: argument name and component identifier."""

    arg: str                    # "a" or "b"
    comp: str                   # component identifier, e.g. "e12"


@dataclass(frozen=True)
class Term:
    """coef * product of factors (factors sorted, repeated for powers)."""

    coef: Fraction
    factors: tuple[Factor, ...]


@dataclass(frozen=True)
class Formula:
    """The exact polynomial of one output component."""

    comp: str                   # output component identifier
    terms: tuple[Term, ...]     # empty tuple: structurally zero (a padded result component)
    text: str | None = None     # canonical text of a non-polynomial formula (inverse, exp)


# --- expression tree printed by the targets -------------------------------------------------

@dataclass(frozen=True)
class Var:
    name: str                   # an emitted identifier: "a_e12", "t3"


@dataclass(frozen=True)
class Num:
    value: Fraction


@dataclass(frozen=True)
class Prod:
    factors: tuple             # of nodes


@dataclass(frozen=True)
class Sum:
    terms: tuple               # of (sign, node) with sign in (+1, -1)


@dataclass(frozen=True)
class Div:
    num: object
    den: object


@dataclass(frozen=True)
class Call:
    """A function of the runtime table: "sqrt", or a helper every target defines:
    exp_c(x) = sum x^k/(2k)!, exp_s(x) = sum x^k/(2k+1)!, exp_d(x) = (exp_c(x) - exp_s(x))/x
    (cos/cosh, sin(t)/t or sinh(t)/t of t = sqrt(|x|), and their smooth limit; series near 0)."""

    fn: str
    args: tuple


@dataclass(frozen=True)
class Assignment:
    target: str                 # temporary name or output component identifier
    expr: object                # an expression tree node


@dataclass(frozen=True)
class Counts:
    """Operation counts (DESIGN section 5): negation is free, multiplication by +-1 too."""

    mul: int = 0
    add: int = 0
    div: int = 0
    calls: int = 0

    def __add__(self, other: "Counts") -> "Counts":
        return Counts(self.mul + other.mul, self.add + other.add,
                      self.div + other.div, self.calls + other.calls)

    def as_dict(self) -> dict:
        out = {"mul": self.mul, "add": self.add}
        if self.div:
            out["div"] = self.div
        if self.calls:
            out["calls"] = self.calls
        return out


@dataclass(frozen=True)
class Program:
    """The straight-line code of one kernel: temporaries, then one expression per output."""

    temps: tuple[Assignment, ...]
    outputs: tuple[Assignment, ...]     # in the result type's component order
    counts: Counts
    form: str                           # name of the chosen form
    forms: tuple[tuple[str, Counts], ...] = ()   # every form compared, with its counts
    applied: tuple[str, ...] = ()       # optimizations applied ("group-coefficients", "cse")


@dataclass(frozen=True)
class Kernel:
    """A derived kernel: the exact formulas before optimization."""

    name: str
    op: str
    args: tuple[str, ...]               # type names
    result: str                         # result type name
    formulas: tuple[Formula, ...]       # one per result component, in result order
    arg_names: tuple[str, ...] = ("a", "b")
    summary: str = ""
    grades: tuple[int, ...] | None = None
    program: Program | None = None
    arg_fields: tuple = ()              # component identifiers of each argument type
    options: tuple = ()                 # op-specific keys from the spec, e.g. (("origin", "eo"),)
    rows: str | None = None             # sandwich_matrix: the type of the transformed element
    one_to_many: Program | None = None  # sandwich: temps depend on `a` only (hoistable), then outputs


@dataclass(frozen=True)
class Module:
    """Everything the emitters need for one algebra."""

    name: str
    spec_path: str                      # as shown in generated-file banners
    spec_digest: str
    basis: tuple[str, ...]
    metric: tuple[tuple[Fraction, ...], ...]
    types: tuple[TypeDef, ...]          # declared types, then inferred result types
    kernels: tuple[Kernel, ...]
    targets: dict = field(default_factory=dict)   # target name -> options
    preferred: tuple[str, ...] = ()     # the spec's preferred blade names

    def type(self, name: str) -> TypeDef:
        for t in self.types:
            if t.name == name:
                return t
        raise KeyError(name)
