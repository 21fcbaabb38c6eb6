"""The C target: `NAME.h`, header-only C99 that also compiles as C++ (DESIGN section 5).

One struct per type (a `NAME_real` field per component, named by the component's identifier),
and per kernel a by-value `static inline` function plus an `_n` loop over arrays.  Argument
components are read straight from the structs (`a.e12`): the printer renames the IR's
`a_e12` variables, so no local goes unused and `-Wall -Wextra` stays quiet.  Every name the
header declares starts with the algebra's name; `names.c_names` lists them all, and
`model.check_names` turns a clash (a type `x` and a kernel `x`, a kernel `x_n` beside a kernel
`x`) into a located spec error before anything is derived.
A sandwich kernel also gets `NAME_<kernel>_fixed_n(a, n, b, out)`, one fixed versor applied to n
elements, printed from `Kernel.one_to_many`: the matrix of `a` before the loop, M b inside it.

The header is written for `-O3 -march=native` (gcc or clang; FMA contraction in the GNU modes or
with `-ffp-contract=fast`): the `_n` loops are plain loops over restrict pointers to structs,
left to the compiler's vectorizer.  A negative product inside a sum is printed `+ (-x)*y`, not
`- x*y`: every term of a bilinear product is then the same operation, and gcc 12 vectorizes such
loops across elements (four rotor products per step) instead of within one element, which
measured 25% faster for the rotor product at N = 10^4 (issue 8).

The scalar type is `[targets.c] real`, overridable by defining `NAME_REAL` before the include;
number literals are cast to it.  Math functions go through small helpers that compute in
double and cast back, so a float build has no implicit double promotion or narrowing.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..ir import Call, Counts, Div, Kernel, Module, Prod, Sum, Var
from ..optimize import program_cost
from .base import Emitter, KernelView, OutputView, helper_views
from .printer import Printer, Syntax, c_double, c_number

# ir.Call functions with a C spelling: tree name -> (libm function, arity)
C_MATH = {"sqrt": ("sqrt", 1), "cos": ("cos", 1), "sin": ("sin", 1), "cosh": ("cosh", 1),
          "sinh": ("sinh", 1), "abs": ("fabs", 1), "atan2": ("atan2", 2)}
HELPER_FUNCTIONS = ("exp_c", "exp_s", "exp_d")
PARAMS = ("y", "x")             # parameter names of the math wrappers, by arity


class FieldPrinter(Printer):
    """A printer that spells argument components as struct fields: a_e12 -> a.e12."""

    def __init__(self, syntax: Syntax):
        super().__init__(syntax)
        self.fields: dict[str, str] = {}

    def expr(self, node, prec: int = 0) -> str:
        if isinstance(node, Var) and node.name in self.fields:
            return self.fields[node.name]
        return super().expr(node, prec)

    def piece(self, i: int, sign: int, term) -> str:
        """A negative product after the first term as `+ (-x)*y` (see the module docstring)."""
        if i and sign < 0 and isinstance(term, Prod) and isinstance(term.factors[0], Var):
            first, *rest = (self.expr(f, 2) for f in term.factors)
            return " + " + "*".join([f"(-{first})", *rest])
        return super().piece(i, sign, term)


def variables(node):
    """Every Var name in an expression tree."""
    if isinstance(node, Var):
        yield node.name
    elif isinstance(node, (Prod, Call)):
        for child in (node.factors if isinstance(node, Prod) else node.args):
            yield from variables(child)
    elif isinstance(node, Sum):
        for _, child in node.terms:
            yield from variables(child)
    elif isinstance(node, Div):
        yield from variables(node.num)
        yield from variables(node.den)


@dataclass(frozen=True)
class MathView:
    name: str                   # "drone_sqrt"
    params: str                 # "drone_real x"
    call: str                   # "sqrt((double)x)"


@dataclass(frozen=True)
class FixedView:
    """`NAME_<kernel>_fixed_n` of a sandwich kernel, printed from Kernel.one_to_many."""

    params: tuple[str, ...]     # "drone_rotor a", "size_t n", "const drone_vec *drone_RESTRICT b"
    unused: tuple[str, ...]
    temps: tuple[OutputView, ...]       # the matrix of `a`, before the loop
    outputs: tuple[OutputView, ...]     # M b[i], inside it
    once: Counts                # operations before the loop
    per_row: Counts             # operations per element


@dataclass(frozen=True)
class CKernelView:
    view: KernelView            # printed temps and outputs
    name: str                   # "drone_compose"
    result: str                 # "drone_rotor"
    params: str                 # "drone_rotor a, drone_rotor b"
    unused: tuple[str, ...]     # arguments no formula reads
    loop_params: tuple[str, ...]    # "const drone_rotor *drone_RESTRICT a", ...
    call: str                   # "a[i], b[i]"
    fixed: FixedView | None = None      # sandwich kernels: one versor on n elements


class CEmitter(Emitter):
    target = "c"
    template = "c/header.h.j2"

    @property
    def real(self) -> str:
        return self.options.get("real", "double")

    def syntax(self, module: Module | None = None) -> Syntax:
        prefix = module.name if module is not None else "NAME"
        functions = {fn: f"{prefix}_{fn}" for fn in tuple(C_MATH) + HELPER_FUNCTIONS}
        return Syntax(c_number(f"{prefix}_real"), functions)

    def files(self, module: Module) -> dict[str, str]:
        printer = FieldPrinter(self.syntax(module))
        kernels = [self.c_kernel(module, k, printer) for k in module.kernels]
        unknown = sorted(printer.used - set(C_MATH) - set(HELPER_FUNCTIONS))
        if unknown:
            raise ValueError(f"the C target has no spelling for the function(s) {unknown}")
        helpers = helper_views(Printer(Syntax(c_double)), printer.used)
        text = self.render(self.template, banner=self.banner(module), module=module.name,
                           real=self.real, types=self.type_rows(module), kernels=kernels,
                           maths=self.math_views(module, printer.used), helpers=helpers,
                           needs_math=bool(printer.used))
        return {f"{module.name}.h": text}

    def c_kernel(self, module: Module, kernel: Kernel, printer: FieldPrinter) -> CKernelView:
        p = module.name
        args = [self.arg_view(module, n, t) for n, t in zip(kernel.arg_names, kernel.args)]
        printer.fields = {loc: f"{a.name}.{f}" for a in args for loc, f in zip(a.locals, a.fields)}
        view = self.kernel_view(module, kernel, printer, self.indent * 2)
        prog = kernel.program
        read = {v for asg in prog.temps + prog.outputs for v in variables(asg.expr)}
        unused = tuple(a.name for a in args if not read & set(a.locals))
        result = f"{p}_{kernel.result}"
        loop = tuple(f"const {p}_{a.type} *{p}_RESTRICT {a.name}" for a in args)
        fixed = self.fixed_view(module, kernel, printer, args) if kernel.one_to_many else None
        return CKernelView(view, f"{p}_{kernel.name}", result,
                           ", ".join(f"{p}_{a.type} {a.name}" for a in args), unused,
                           loop + (f"{result} *{p}_RESTRICT out",),
                           ", ".join(f"{a.name}[i]" for a in args), fixed)

    def fixed_view(self, module: Module, kernel: Kernel, printer: FieldPrinter, args) -> FixedView:
        """The one-versor loop: `a` by value, `b[i]` read field by field inside the loop."""
        p, (a, b), prog = module.name, args, kernel.one_to_many
        printer.fields = {loc: f"{a.name}.{f}" for loc, f in zip(a.locals, a.fields)}
        printer.fields.update({loc: f"{b.name}[i].{f}" for loc, f in zip(b.locals, b.fields)})
        temps = tuple(OutputView(t.target, printer.wrapped(t.expr, self.indent * 2))
                      for t in prog.temps)
        outputs = tuple(OutputView(o.target, printer.wrapped(o.expr, self.indent * 3))
                        for o in prog.outputs)
        read = {v for asg in prog.temps + prog.outputs for v in variables(asg.expr)}
        unused = tuple(x.name for x in (a, b) if not read & set(x.locals))
        params = (f"{p}_{a.type} {a.name}", "size_t n",
                  f"const {p}_{b.type} *{p}_RESTRICT {b.name}", f"{p}_{kernel.result} *{p}_RESTRICT out")
        return FixedView(params, unused, temps, outputs, program_cost(prog.temps, ()),
                         program_cost((), prog.outputs))

    @staticmethod
    def math_views(module: Module, used) -> tuple[MathView, ...]:
        views = []
        for fn, (cfn, arity) in C_MATH.items():
            if fn in used:
                params = PARAMS[-arity:]
                views.append(MathView(f"{module.name}_{fn}",
                                      ", ".join(f"{module.name}_real {x}" for x in params),
                                      f"{cfn}({', '.join(f'(double){x}' for x in params)})"))
        return tuple(views)

