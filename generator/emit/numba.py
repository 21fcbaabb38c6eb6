"""The numba target: `NAME_numba.py`, the Python kernels compiled with `njit`, plus batch loops.

Every kernel is the Python target's function under `@njit(cache=True)` (same calling convention:
sequences in, a tuple out).  `<kernel>_batch(a, b, out=None)` checks its arguments in plain
Python (shapes, dtypes, layout: a `ValueError` that names the argument and the expected shape),
then runs one of a few small compiled loops over the flattened (N*k,) views of the arrays:

- `_<kernel>_each`: every argument has N rows;
- `_<kernel>_one_a` / `_<kernel>_one_b`: that argument is a single element, read once before the
  loop (no per-element branch, no stride-0 indexing).

A loop reads each row's components into a tuple at constant offsets (`a[4*i + 1]`), calls the
scalar kernel (which LLVM inlines) and unpacks the result into `out`; this layout lets LLVM
vectorize the interleaved loads and stores, which indexing an (N, k) array by `[i, j]` does not.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..ir import Kernel, Module
from .base import Emitter, check_unique, helper_views, kernel_keys
from .printer import WIDTH, Printer, Syntax, python_number
from .python import PY_FUNCTIONS

DECORATOR = '@njit(cache=True, error_model="numpy")'
LOOP_COLUMN = 12                # where a loop's call arguments start


@dataclass(frozen=True)
class BatchArg:
    name: str                   # "a"
    type: str
    k: int                      # number of components


@dataclass(frozen=True)
class LoopView:
    name: str                   # "_compose_each"
    doc: str
    hoist: str                  # "(a[0], a[1])" for a single-element argument, else ""
    store: str                  # "(out[4*i], ...)"
    loads: tuple[str, ...]      # one tuple per argument ("t" for the hoisted one)


@dataclass(frozen=True)
class BatchView:
    name: str                   # "compose_batch"
    doc: str
    params: str                 # "a, b"
    args: tuple[BatchArg, ...]
    result: str
    k: int
    loops: tuple[LoopView, ...]  # each, then one_a and one_b for binary kernels


def components(name: str, k: int, row: str) -> list[str]:
    """The k components of one row of a flattened array: a[4*i], a[4*i + 1], ... or a[0], ..."""
    if row == "0":
        return [f"{name}[{j}]" for j in range(k)]
    first = row if k == 1 else f"{k}*{row}"
    return [f"{name}[{first} + {j}]" if j else f"{name}[{first}]" for j in range(k)]


def wrapped_tuple(items: list[str], column: int, tail: int = 0) -> str:
    """'(x, y, ...)' opened at `column` (a 1-tuple keeps its comma), broken after commas so that
    no line passes WIDTH, leaving `tail` characters free after the last; continuation lines line
    up inside the parenthesis."""
    if len(items) == 1:
        return f"({items[0]},)"
    lines, line = [], "(" + items[0]
    for i, item in enumerate(items[1:], 2):
        if column + len(line) + len(item) + 3 + (tail if i == len(items) else 0) > WIDTH:
            lines.append(line + ",")
            line = item
        else:
            line += ", " + item
    lines.append(line + ")")
    return ("\n" + " " * (column + 1)).join(lines)


class NumbaEmitter(Emitter):
    target = "numba"
    template = "numba/module.py.j2"

    def syntax(self) -> Syntax:
        return Syntax(python_number, PY_FUNCTIONS)

    def files(self, module: Module) -> dict[str, str]:
        check_unique(module, self.target, self.public_names(module))
        printer = Printer(self.syntax())
        entries = [(self.kernel_view(module, k, printer, self.indent * 2), self.batch_view(module, k))
                   for k in module.kernels]
        helpers = helper_views(printer, printer.used)
        imports = sorted({"math"} if printer.used - {"abs"} else set())
        text = self.render(self.template, banner=self.banner(module), module=module.name,
                           types=self.type_rows(module), entries=entries, helpers=helpers,
                           imports=imports, decorator=DECORATOR)
        return {f"{module.name}_numba.py": text}

    @staticmethod
    def public_names(module: Module):
        names = [("TYPES", "(module)", "type table"), ("KERNELS", "(module)", "kernel table")]
        for key, k in kernel_keys(module):
            names += [(k.name, key, "kernel"), (f"{k.name}_batch", key, "batch function")]
        return names

    def batch_view(self, module: Module, kernel: Kernel) -> BatchView:
        args = tuple(BatchArg(n, t, len(module.type(t).components))
                     for n, t in zip(kernel.arg_names, kernel.args))
        k = len(module.type(kernel.result).components)
        singles = ("",) + (tuple(a.name for a in args) if len(args) == 2 else ())
        loops = tuple(self.loop_view(kernel, args, k, single) for single in singles)
        shapes = ", ".join(f"{a.name} (N, {a.k}) {a.type}" for a in args)
        doc = f"{kernel.name} over rows: {shapes} -> (N, {k}) {kernel.result}."
        return BatchView(f"{kernel.name}_batch", doc, ", ".join(a.name for a in args), args,
                         kernel.result, k, loops)

    @staticmethod
    def loop_view(kernel: Kernel, args: tuple[BatchArg, ...], k: int, single: str) -> LoopView:
        suffix = f"one_{single}" if single else "each"
        doc = (f"{kernel.name} of one `{single}` with each row of the other argument." if single
               else f"{kernel.name} of row i of every argument, for i < n.")
        hoist, loads = "", []
        for a in args:
            if a.name == single:
                hoist = wrapped_tuple(components(a.name, a.k, "0"), len("    t = "))
                loads.append("t")
            else:
                loads.append(wrapped_tuple(components(a.name, a.k, "i"), LOOP_COLUMN))
        store = wrapped_tuple(components("out", k, "i"), 8, tail=len(f" = {kernel.name}("))
        return LoopView(f"_{kernel.name}_{suffix}", doc, hoist, store, tuple(loads))
