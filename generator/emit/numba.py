"""The numba target: `NAME_numba.py`, the Python kernels compiled with `njit`, plus batch loops.

Every kernel is the Python target's function under `@njit(cache=True)` (same calling convention:
sequences in, a tuple out).  `<kernel>_batch(a, b, out=None)` checks its arguments in plain
Python (shapes, dtypes, layout: a `ValueError` that names the argument and the expected shape;
well-formed arrays take a short path first), then runs one of a few compiled loops, which
flatten their (N, k) arguments:

- `_<kernel>_each`: every argument has N rows;
- `_<kernel>_one_a` / `_<kernel>_one_b`: that argument is a single element, read once before the
  loop (no per-element branch, no stride-0 indexing).  For a sandwich kernel, `_one_a` is printed
  from `Kernel.one_to_many`: the matrix of the one versor is computed before the loop, and each
  row costs only that matrix applied to it (one motor, many points).

Each loop spells the kernel's formulas out in its body: a row's components are read into
locals at constant offsets (`a_e12 = _load(a, 4*i + 1)`), then each result component is stored
(`_store(out, 4*i + 1, ...)`).  Calling the scalar kernel instead left long kernels as a call per
row (too long for LLVM's inliner: 4x slower for the spacetime sandwich).  There is no fast-math,
not even FMA contraction: with it the same row could round differently in different loops
(which products fuse depends on the code around them), and broadcasting one element would no
longer equal repeating it.

`_load` and `_store` are numba intrinsics defined in the module: plain element access, except
that the address is an `inbounds` GEP (the batch wrapper has checked every shape, so each index
is in range).  With numba's own indexing the addresses are not `inbounds`, so LLVM's loop
vectorizer needs a run-time no-wrap check per access and gives up beyond 16 of them ("Too many
SCEV assumptions", its `-vectorize-scev-check-threshold`): every loop whose row moves more than
16 components stayed scalar.  With `inbounds` they vectorize (issue 8, numba 0.68, Xeon with
AVX-512, N = 10^6 unless said): the 8 x 8 product 0.73x the time of the scalar loop (0.59x in
cache), the motor product 0.80x, the line sandwich 0.80x, the spacetime product 0.72x; two
point-pair outer products got slower in cache (1.5x, still 1.0x at N = 10^6) and the spacetime
`difference` 1.27x at N = 10^6, where LLVM's cost model misjudged.  The loops run forwards:
backwards, kept earlier for the scalar loops, was slower for nearly every vectorized loop (up
to 1.2x); LLVM's remarks come from `llvmlite.binding.set_option` before compiling.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..ir import Kernel, Module, Program
from ..optimize import program_cost
from .base import ArgView, Emitter, OutputView, helper_views
from .printer import Printer, Syntax, python_float, python_number
from .python import PY_FUNCTIONS

DECORATOR = '@njit(cache=True, error_model="numpy")'
PAD = "    "


@dataclass(frozen=True)
class BatchArg:
    name: str                   # "a"
    type: str
    k: int                      # number of components


@dataclass(frozen=True)
class BodyView:
    """The statements of one loop: what is read and computed once, then what is done per row."""

    once: tuple[OutputView, ...]        # a single element's components; a sandwich's matrix
    load: tuple[OutputView, ...]        # b_e1 = _load(b, 3*i), ...: the row's components
    temps: tuple[OutputView, ...]       # the kernel's temporaries, per row
    stores: tuple[OutputView, ...]      # (3*i + 1, the formula of that component): _store(out, ...)
    comps: tuple[str, ...]              # the result component of each store (comments)


@dataclass(frozen=True)
class LoopView:
    name: str                   # "_compose_each"
    doc: str
    body: BodyView


@dataclass(frozen=True)
class BatchView:
    name: str                   # "compose_batch"
    doc: str
    params: str                 # "a, b"
    args: tuple[BatchArg, ...]
    result: str
    k: int
    loops: tuple[LoopView, ...]  # each, then one_a and one_b for binary kernels


def offsets(k: int, row: str) -> list[str]:
    """Where the k components of one row of a flattened array are: 4*i, 4*i + 1, ... or 0, 1, ..."""
    if row == "0":
        return [str(j) for j in range(k)]
    first = row if k == 1 else f"{k}*{row}"
    return [f"{first} + {j}" if j else first for j in range(k)]


def components(name: str, k: int, row: str) -> list[str]:
    """How the loops read them: a[0], a[1], ... once, _load(a, 4*i), ... per row."""
    if row == "0":
        return [f"{name}[{at}]" for at in offsets(k, row)]
    return [f"_load({name}, {at})" for at in offsets(k, row)]


def counted(program: Program) -> tuple[str, str]:
    """('25 multiplies, 21 adds' of the temporaries, the same of the outputs)."""
    def text(c):
        return f"{c.mul} multiplies, {c.add} adds"
    return text(program_cost(program.temps, ())), text(program_cost((), program.outputs))


class NumbaEmitter(Emitter):
    target = "numba"
    template = "numba/module.py.j2"

    def syntax(self) -> Syntax:
        return Syntax(python_number, PY_FUNCTIONS, constant=python_float)

    def files(self, module: Module) -> dict[str, str]:
        printer = Printer(self.syntax())
        entries = [(self.kernel_view(module, k, printer, PAD * 2),
                    self.batch_view(module, k, printer)) for k in module.kernels]
        helpers = helper_views(printer, printer.used)
        imports = sorted({"math"} if printer.used - {"abs"} else set())
        text = self.render(self.template, banner=self.banner(module), module=module.name,
                           types=self.type_rows(module), entries=entries, helpers=helpers,
                           imports=imports, decorator=DECORATOR)
        return {f"{module.name}_numba.py": text}

    def batch_view(self, module: Module, kernel: Kernel, printer: Printer) -> BatchView:
        args = tuple(BatchArg(n, t, len(module.type(t).components))
                     for n, t in zip(kernel.arg_names, kernel.args))
        k = len(module.type(kernel.result).components)
        singles = ("",) + (tuple(a.name for a in args) if len(args) == 2 else ())
        loops = tuple(self.loop_view(module, kernel, printer, single) for single in singles)
        shapes = ", ".join(f"{a.name} (N, {a.k}) {a.type}" for a in args)
        doc = f"{kernel.name} over rows: {shapes} -> (N, {k}) {kernel.result}."
        return BatchView(f"{kernel.name}_batch", doc, ", ".join(a.name for a in args), args,
                         kernel.result, k, loops)

    def loop_view(self, module: Module, kernel: Kernel, printer: Printer, single: str) -> LoopView:
        """`_<kernel>_each` (single "") or `_<kernel>_one_<single>`, formulas in the loop body."""
        args = [self.arg_view(module, n, t) for n, t in zip(kernel.arg_names, kernel.args)]
        fixed = single == "a" and kernel.one_to_many is not None
        prog = kernel.one_to_many if fixed else kernel.program
        result = [c.ident for c in module.type(kernel.result).components]
        once = [u for a in args if a.name == single for u in self.unpacked(a, "0")]
        hoisted = self.printed(printer, prog.temps, 2) if fixed else ()
        body = BodyView(
            once=tuple(once) + hoisted,
            load=tuple(u for a in args if a.name != single for u in self.unpacked(a, "i")),
            temps=() if fixed else self.printed(printer, prog.temps, 3),
            stores=tuple(OutputView(at, printer.result(o.expr, PAD * 3))
                         for at, o in zip(offsets(len(result), "i"), prog.outputs)),
            comps=tuple(result))
        return LoopView(f"_{kernel.name}_{f'one_{single}' if single else 'each'}",
                        self.loop_doc(kernel, single, fixed), body)

    @staticmethod
    def loop_doc(kernel: Kernel, single: str, fixed: bool) -> str:
        if fixed:
            once, per_row = counted(kernel.one_to_many)
            return (f"{kernel.name} of one `a` with each row of `b`: the matrix of `a` once "
                    f"({once}),\n    then {per_row} per row.")
        if single:
            return f"{kernel.name} of one `{single}` with each row of the other argument."
        return f"{kernel.name} of row i of every argument, for i < n."

    @staticmethod
    def printed(printer: Printer, assignments, depth: int) -> tuple[OutputView, ...]:
        """Temporaries printed for a loop at `depth` indents (wrapped lines one deeper)."""
        return tuple(OutputView(a.target, printer.wrapped(a.expr, PAD * depth))
                     for a in assignments)

    @staticmethod
    def unpacked(arg: ArgView, row: str) -> tuple[OutputView, ...]:
        """One `a_e12 = _load(a, 4*i + 1)` per component (row "0": `a[1]`, the single element)."""
        return tuple(OutputView(local, item) for local, item in
                     zip(arg.locals, components(arg.name, len(arg.fields), row)))
