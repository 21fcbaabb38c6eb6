"""The pure Python target: `NAME.py`, no imports, one function per kernel (DESIGN section 5)."""
from __future__ import annotations

from ..ir import Module
from .base import Emitter, helper_views
from .printer import Printer, Syntax, python_float, python_number

PY_FUNCTIONS = {"sqrt": "math.sqrt", "cos": "math.cos", "sin": "math.sin", "cosh": "math.cosh",
                "sinh": "math.sinh", "atan2": "math.atan2", "abs": "abs",
                "exp_c": "_exp_c", "exp_s": "_exp_s", "exp_d": "_exp_d"}


class PythonEmitter(Emitter):
    target = "python"
    template = "python/module.py.j2"
    suffix = ".py"

    def syntax(self) -> Syntax:
        return Syntax(python_number, PY_FUNCTIONS, constant=python_float)

    def files(self, module: Module) -> dict[str, str]:
        printer = Printer(self.syntax())
        kernels = [self.kernel_view(module, k, printer, self.indent * 2) for k in module.kernels]
        helpers = helper_views(printer, printer.used)
        imports = sorted({"math"} if printer.used - {"abs"} else set())
        text = self.render(self.template, banner=self.banner(module), module=module.name,
                           types=self.type_rows(module), kernels=kernels, imports=imports,
                           helpers=helpers)
        return {f"{module.name}{self.suffix}": text}
