"""Build specs into a temporary directory with the CLI and load what they emit.

`build` runs `bladesmith build SPEC --out DIR -q`, exactly what a user runs, and reads the
manifest.  `load_module` (`generator.verify.load_python`) imports an emitted Python or numba
file under a private name; numba's cache then lands in that temporary directory, never in
generated/.  `CLibrary` compiles a tiny
wrapper around the emitted header with `-O3 -march=native` and loads it with ctypes.

The wrapper exports, for each kernel asked for, `bench_K(reps, n, a, b, out)`, which calls
`NAME_K_n(n, a, b, out)` `reps` times, and, when the header has one, `bench_K_fixed(reps, n, a,
b, out)` around `NAME_K_fixed_n(*a, n, b, out)` (one element `a` against n elements `b`).  An
empty `asm volatile` with a memory clobber between repetitions keeps the compiler from merging
them.  The loop in C means one ctypes call (about a microsecond) per repetition, not per kernel
call.  `sizeof` of every struct is checked against its component count, so an (N, k) float64
array can stand for an array of structs.
"""
from __future__ import annotations

import ctypes
import json
import re
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

from generator.native import compiler
from generator.verify import load_python as load_module  # noqa: F401  (re-exported)

C_FLAGS = ("-O3", "-march=native", "-fPIC", "-shared")
REPEAT = ("for (size_t r = 0; r < reps; ++r) {{ {call}; "
          "__asm__ __volatile__(\"\" ::: \"memory\"); }}")


@dataclass(frozen=True)
class Built:
    """One spec built into `out`: its algebra name and manifest."""

    name: str
    out: Path
    manifest: dict

    def kernel(self, name: str) -> dict:
        return next(k for k in self.manifest["kernels"] if k["name"] == name)

    def width(self, type_name: str) -> int:
        """Number of components of a type."""
        return len(self.manifest["types"][type_name])


def cli() -> list[str]:
    """The `bladesmith` command of this interpreter's environment."""
    beside = Path(sys.executable).with_name("bladesmith")
    found = str(beside) if beside.exists() else shutil.which("bladesmith")
    if not found:
        raise SystemExit("bench: the bladesmith command is not installed (pip install -e .)")
    return [found]


def build(spec: Path, out: Path) -> Built:
    """`bladesmith build SPEC --out OUT -q`, then the manifest."""
    subprocess.run(cli() + ["build", str(spec), "--out", str(out), "-q"], check=True)
    manifest = next(out.glob("*.manifest.json"))
    data = json.loads(manifest.read_text(encoding="utf-8"))
    return Built(data["algebra"]["name"], out, data)


def compiler_version() -> str:
    """First line of `cc --version` of the compiler the benchmarks use."""
    done = subprocess.run([compiler(), "--version"], capture_output=True, text=True)
    return (done.stdout.splitlines() or ["unknown"])[0]


def has_fixed(built: Built, kernel: str) -> bool:
    """Whether the header declares `NAME_<kernel>_fixed_n`."""
    header = (built.out / f"{built.name}.h").read_text(encoding="utf-8")
    return re.search(rf"\b{built.name}_{kernel}_fixed_n\s*\(", header) is not None


def wrapper(built: Built, kernels: list[str], fixed: set[str]) -> str:
    """C source of the wrapper for these kernels (binary kernels only)."""
    p = built.name
    lines = [f'#include "{p}.h"']
    for t in sorted({t for k in kernels for t in signature(built, k)}):
        lines.append(f"size_t bench_size_{t}(void) {{ return sizeof({p}_{t}); }}")
    for k in kernels:
        a, b, r = signature(built, k)
        casts = f"(const {p}_{a} *)a, (const {p}_{b} *)b, ({p}_{r} *)out"
        lines.append(entry(f"bench_{k}", REPEAT.format(call=f"{p}_{k}_n(n, {casts})")))
        if k in fixed:
            call = f"{p}_{k}_fixed_n(*(const {p}_{a} *)a, n, (const {p}_{b} *)b, ({p}_{r} *)out)"
            lines.append(entry(f"bench_{k}_fixed", REPEAT.format(call=call)))
    return "\n".join(lines) + "\n"


def signature(built: Built, kernel: str) -> tuple[str, str, str]:
    k = built.kernel(kernel)
    return k["args"][0], k["args"][1], k["result"]


def entry(name: str, body: str) -> str:
    return (f"void {name}(size_t reps, size_t n, const void *a, const void *b, void *out)\n"
            f"{{\n    {body}\n}}")


class CLibrary:
    """The emitted header's `_n` (and `_fixed_n`) kernels, compiled and loaded."""

    def __init__(self, built: Built, kernels: list[str], tmp: Path):
        self.built, self.notes = built, []
        self.fixed = {k for k in kernels if has_fixed(built, k)}
        self.lib = self._compile(kernels, tmp)
        self._check_sizes(kernels)

    def _compile(self, kernels: list[str], tmp: Path):
        try:
            return self._compile_with(kernels, self.fixed, tmp)
        except RuntimeError as error:       # a `_fixed_n` whose signature is not the expected one
            if not self.fixed:
                raise
            self.notes.append(f"`_fixed_n` not used: {error}")
            self.fixed = set()
            return self._compile_with(kernels, self.fixed, tmp)

    def _compile_with(self, kernels: list[str], fixed: set[str], tmp: Path):
        src, lib = tmp / f"{self.built.name}_bench.c", tmp / f"lib{self.built.name}_bench.so"
        src.write_text(wrapper(self.built, kernels, fixed), encoding="utf-8")
        cmd = [compiler(), *C_FLAGS, "-I", str(self.built.out), str(src), "-o", str(lib), "-lm"]
        done = subprocess.run(cmd, capture_output=True, text=True)
        if done.returncode != 0:
            raise RuntimeError(f"{' '.join(cmd)}: {done.stderr.strip()[:400]}")
        return ctypes.CDLL(str(lib))

    def _check_sizes(self, kernels: list[str]) -> None:
        for t in {t for k in kernels for t in signature(self.built, k)}:
            fn = getattr(self.lib, f"bench_size_{t}")
            fn.restype = ctypes.c_size_t
            if fn() != 8 * self.built.width(t):
                raise RuntimeError(f"struct {self.built.name}_{t} is not "
                                   f"{self.built.width(t)} doubles")

    def runner(self, kernel: str, a, b, out, fixed: bool = False):
        """`run(number)`: `number` calls of the kernel on these float64 arrays."""
        fn = getattr(self.lib, f"bench_{kernel}_fixed" if fixed else f"bench_{kernel}")
        fn.restype = None
        fn.argtypes = [ctypes.c_size_t, ctypes.c_size_t] + [ctypes.c_void_p] * 3
        n, pointers = out.shape[0], (a.ctypes.data, b.ctypes.data, out.ctypes.data)
        return lambda number: fn(number, n, *pointers)
