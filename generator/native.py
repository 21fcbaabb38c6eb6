"""Run the compiled targets for `verify`: the numba module, and the C header through ctypes.

C: a small generated wrapper (templates/c/wrapper.c.j2) includes the emitted header from the
output directory and exports each `NAME_<kernel>_n` (and each sandwich's `NAME_<kernel>_fixed_n`,
taking its versor by pointer) with C linkage; it is compiled with the
system C compiler (`$CC`, else `cc`, `gcc` or `clang` on PATH) into a shared library in a
temporary directory (never the output directory), loaded with ctypes and called on numpy
buffers: an array of structs is just a contiguous (N, k) array of the scalar type, which the
wrapper checks by reporting `sizeof` of every struct.

Each `*_runners` function returns what `verify.RUNNERS` expects: (label, run(kernel, inputs) ->
(N, k) array, relative tolerance, note).  A float build is checked with a tolerance derived from
float32's machine epsilon and the number of terms (`FLOAT_REL`, raised for ill-conditioned
kernels by `float_tolerance`), and its note says so.
"""
from __future__ import annotations

import atexit
import ctypes
import errno
import os
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .emit.base import environment
from .ir import Kernel, Module
from .names import c_names

DOUBLE_REL = 1e-10
FLOAT_EPS = float(np.finfo(np.float32).eps)     # 2^-23
FLOAT_REL = 4 * FLOAT_EPS
FLOAT_NOTE = (f"float32: tolerance = 4 x eps32 ({FLOAT_EPS:.3g}) x (1 + max |reference|) x terms "
              "per component, or 4 x the change eps32 input perturbations cause in the double "
              "build where that is larger")
FIXED_NOTE = "sandwich: one versor (a[i]) on all N rows of b, row i compared"
COMPILERS = ("cc", "gcc", "clang")
C_FLAGS = ("-std=c99", "-O2", "-fPIC", "-shared", "-Wall", "-Wextra", "-pedantic")
CXX_FLAGS = ("-x", "c++", "-std=c++17", "-O2", "-fPIC", "-shared", "-Wall", "-Wextra")


class NativeError(OSError):
    """A native build step failed (no compiler, a compile error, a layout the wrapper refuses).

    An OSError, so the CLI reports it as `Error: FILE: message` without a traceback."""

    def __init__(self, message: str, path: str = ""):
        super().__init__(errno.ENOEXEC, message, path)


def compiler(language: str = "c") -> str:
    """The C (or C++) compiler: $CC / $CXX, else the first of cc, gcc, clang (c++, g++, clang++)."""
    env, names = ("CXX", ("c++", "g++", "clang++")) if language == "c++" else ("CC", COMPILERS)
    for name in ([os.environ[env]] if os.environ.get(env) else []) + list(names):
        found = shutil.which(name)
        if found:
            return found
    raise NativeError(f"no {language} compiler found (looked for ${env} and {', '.join(names)} "
                      "on PATH); install one, e.g. gcc, to verify the C target", names[0])


@dataclass(frozen=True)
class Wrapper:
    name: str                   # exported symbol
    params: str                 # "const drone_rotor *a, const drone_rotor *b, drone_rotor *out"
    call: str                   # "drone_compose_n(n, a, b, out)"


def symbol_prefix(module: Module) -> str:
    """A prefix for the wrapper's symbols that no name in the header starts with."""
    fixed = {k.name for k in module.kernels if k.one_to_many is not None}
    rows = c_names(module.name, {t.name: "" for t in module.types},
                   {k.name: "" for k in module.kernels}, fixed)
    taken = {name for name, _, _ in rows}
    prefix = "bladesmith_verify_"
    while any(name.startswith(prefix) for name in taken):
        prefix = "x" + prefix
    return prefix


def wrapper_source(module: Module) -> str:
    """The C source of the verification wrapper around `NAME.h`."""
    prefix, p = symbol_prefix(module), module.name
    wrappers = []
    for i, k in enumerate(module.kernels):
        args = list(zip(k.arg_names, k.args))
        params = ", ".join([f"const {p}_{t} *{n}" for n, t in args] + [f"{p}_{k.result} *out"])
        call = f"{p}_{k.name}_n(n, {', '.join(n for n, _ in args)}, out)"
        wrappers.append(Wrapper(f"{prefix}{i}", params, call))
        if k.one_to_many is not None:
            call = f"{p}_{k.name}_fixed_n(*a, n, b, out)"
            wrappers.append(Wrapper(f"{prefix}fixed_{i}", params, call))
    return environment().get_template("c/wrapper.c.j2").render(
        module=p, header=f"{p}.h", prefix=prefix, types=[t.name for t in module.types],
        wrappers=wrappers)


class CLibrary:
    """The compiled wrapper, loaded: `run(kernel, inputs)` calls `NAME_<kernel>_n`."""

    def __init__(self, module: Module, path: Path):
        self.module = module
        self.lib = ctypes.CDLL(str(path))
        self.prefix = symbol_prefix(module)
        self.real = self._check_sizes()
        self.dtype = np.dtype(np.float32 if self.real == 4 else np.float64)

    def _check_sizes(self) -> int:
        types = self.module.types
        sizes = (ctypes.c_size_t * (len(types) + 1))()
        getattr(self.lib, f"{self.prefix}sizes")(sizes)
        real = sizes[0]
        if real not in (4, 8):
            raise NativeError(f"{self.module.name}_real is {real} bytes; verify runs float or double")
        for t, size in zip(types, sizes[1:]):
            if size != real * len(t.components):
                raise NativeError(f"struct {self.module.name}_{t.name} is {size} bytes, not "
                                  f"{len(t.components)} x {real}: it cannot alias an array")
        return real

    def function(self, kernel: Kernel, kind: str = ""):
        """The exported `_n` loop of a kernel (kind "fixed_": its `_fixed_n`), ready to call."""
        fn = getattr(self.lib, f"{self.prefix}{kind}{self.module.kernels.index(kernel)}")
        fn.restype = None
        fn.argtypes = [ctypes.c_size_t] + [ctypes.c_void_p] * (len(kernel.arg_names) + 1)
        return fn

    def _buffers(self, kernel: Kernel, inputs: list[np.ndarray]):
        arrays = [np.ascontiguousarray(x, dtype=self.dtype) for x in inputs]
        n = arrays[0].shape[0]
        return arrays, np.full((n, len(self.module.type(kernel.result).components)), np.nan,
                               self.dtype)

    def run(self, kernel: Kernel, inputs: list[np.ndarray]) -> np.ndarray:
        arrays, out = self._buffers(kernel, inputs)
        self.function(kernel)(out.shape[0], *(a.ctypes.data for a in arrays), out.ctypes.data)
        return out.astype(np.float64)

    def run_fixed(self, kernel: Kernel, inputs: list[np.ndarray]) -> np.ndarray | None:
        """Row i from `NAME_<kernel>_fixed_n(a[i], n, b, out)` over all n rows of b; None for a
        kernel without one (not a sandwich)."""
        if kernel.one_to_many is None:
            return None
        fn, ((a, b), out) = self.function(kernel, "fixed_"), self._buffers(kernel, inputs)
        rows = []
        for i in range(len(a)):
            out[:] = np.nan
            fn(len(b), a[i:].ctypes.data, b.ctypes.data, out.ctypes.data)
            rows.append(out[i].astype(np.float64))
        return np.array(rows).reshape(out.shape)


def compile_library(module: Module, out_dir: Path, real: str | None = None,
                    language: str = "c", flags: tuple[str, ...] = ()) -> CLibrary:
    """Compile the wrapper around `out_dir/NAME.h` in a temporary directory and load it.

    `real` overrides the header's scalar type through its `NAME_REAL` macro."""
    header = Path(out_dir) / f"{module.name}.h"
    if not header.is_file():
        raise NativeError("the C header is missing; build the spec with the c target first",
                          str(header))
    cc = compiler(language)
    defines = [f"-D{module.name}_REAL={real}"] if real else []
    with tempfile.TemporaryDirectory(prefix="bladesmith-c-", ignore_cleanup_errors=True) as tmp:
        src, lib = Path(tmp) / "wrapper.c", Path(tmp) / f"lib{module.name}_verify.so"
        src.write_text(wrapper_source(module), encoding="utf-8")
        base = C_FLAGS if language == "c" else CXX_FLAGS
        cmd = [cc, *base, *flags, *defines, "-I", str(header.parent), str(src), "-o", str(lib), "-lm"]
        done = subprocess.run(cmd, capture_output=True, text=True)
        if done.returncode != 0:
            raise NativeError(f"compiling the header failed ({' '.join(cmd)}):\n"
                              f"{done.stderr.strip()}", str(header))
        return CLibrary(module, lib)


def c_runners(module: Module, out_dir: Path):
    """The C target through the compiled `_n` loops; a float build is also compiled as double."""
    lib = compile_library(module, out_dir)
    if lib.real == 8:
        return [("c", lib.run, DOUBLE_REL, ""),
                ("c fixed_n", lib.run_fixed, DOUBLE_REL, FIXED_NOTE)]
    exact = compile_library(module, out_dir, real="double")
    rel = float_tolerance(exact)
    return [("c (float)", lib.run, rel, FLOAT_NOTE),
            ("c (float) fixed_n", lib.run_fixed, rel, FLOAT_NOTE)]


def float_tolerance(double: CLibrary):
    """rel(kernel, inputs) for a float32 build: 4 eps32, or more where the kernel amplifies rounding.

    The amplification is measured, not assumed: the double build of the same header evaluated on
    the inputs perturbed by a relative eps32 (the rounding every float32 input suffers) against
    the double build on the inputs themselves.  An ill-conditioned kernel (an inverse near a
    singular element) amplifies that perturbation as much as float32 arithmetic does."""
    from .verify import SEED, _terms

    def rel(kernel: Kernel, inputs: list[np.ndarray]) -> float:
        rng = np.random.default_rng(SEED)
        base = double.run(kernel, inputs)
        moved = [x * (1 + FLOAT_EPS * rng.uniform(-1.0, 1.0, x.shape)) for x in inputs]
        noise = float(np.max(np.abs(double.run(kernel, moved) - base), initial=0.0))
        scale = (1.0 + float(np.max(np.abs(base), initial=0.0))) * _terms(kernel)
        return max(FLOAT_REL, 4 * noise / scale)
    return rel


_NUMBA_CACHE: list[str] = []


def load_numba(path: Path):
    """Import an emitted numba module with numba's cache in a private temporary directory.

    numba finds cached code by source file but rebuilds it by module name, and `verify` imports
    the file under a name of its own: sharing the `__pycache__` beside the module would leave
    entries that a user's `import NAME_numba` cannot load (and the other way round)."""
    from numba.core import config
    from .verify import load_python
    if not _NUMBA_CACHE:
        _NUMBA_CACHE.append(tempfile.mkdtemp(prefix="bladesmith-numba-"))
        atexit.register(shutil.rmtree, _NUMBA_CACHE[0], True)
    saved, config.CACHE_DIR = config.CACHE_DIR, _NUMBA_CACHE[0]
    try:
        return load_python(path, "numba")
    finally:
        config.CACHE_DIR = saved


def numba_runners(module: Module, out_dir: Path):
    """The numba target: scalar functions, `_batch`, `_batch` broadcasting one element, `out=`."""
    emitted = load_numba(Path(out_dir) / f"{module.name}_numba.py")

    def scalar(kernel, inputs):
        fn = getattr(emitted, kernel.name)
        return np.array([fn(*(x[i] for x in inputs)) for i in range(inputs[0].shape[0])])

    def batch(kernel, inputs):
        return getattr(emitted, f"{kernel.name}_batch")(*inputs)

    def broadcast(kernel, inputs):
        fn = getattr(emitted, f"{kernel.name}_batch")
        return np.array([fn(*single_row(inputs, i))[i if len(inputs) > 1 else 0]
                         for i in range(inputs[0].shape[0])])

    def one_versor(kernel, inputs):
        if kernel.one_to_many is None:
            return None
        fn = getattr(emitted, f"{kernel.name}_batch")
        a, b = inputs
        return np.array([fn(a[i] if i % 2 else a[i:i + 1], b)[i] for i in range(len(a))])

    def into(kernel, inputs):
        out = np.full((inputs[0].shape[0], len(module.type(kernel.result).components)), np.nan)
        got = getattr(emitted, f"{kernel.name}_batch")(*inputs, out=out)
        return out if got is out else np.full_like(out, np.nan)

    return [("numba", scalar, DOUBLE_REL, ""), ("numba batch", batch, DOUBLE_REL, ""),
            ("numba broadcast", broadcast, DOUBLE_REL, "one element (k,) or (1, k) against N"),
            ("numba one versor", one_versor, DOUBLE_REL, FIXED_NOTE),
            ("numba out=", into, DOUBLE_REL, "")]


def single_row(inputs: list[np.ndarray], i: int) -> list[np.ndarray]:
    """The inputs with one argument replaced by its row i alone, as (k,) or (1, k) by turns.

    Unary: just that row.  Binary: row i of the result is then kernel(a_i, b_i)."""
    shaped = (lambda x: x[i]) if (i // len(inputs)) % 2 == 0 else (lambda x: x[i:i + 1])
    which = i % len(inputs)
    if len(inputs) == 1:
        return [shaped(inputs[0])]
    return [shaped(x) if j == which else x for j, x in enumerate(inputs)]
