"""The machine and libraries a run measured on, for the head of RESULTS.md.

BLAS: numpy's einsum (matrix products) and scipy use OpenBLAS.  OpenBLAS picks a kernel for the
CPU at load time; the environment variables OPENBLAS_CORETYPE (force a kernel) and
OPENBLAS_L2_SIZE (the cache size it assumes) override that, and on this project's machines they
are set to values that slow current numpy down.  The README therefore runs the benchmarks with
both unset (`env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python bench/run.py`); the values in
force are recorded here either way.  The kernel actually running is read from threadpoolctl when
it is installed, else from OpenBLAS itself (`openblas_get_corename` through ctypes, in the
libraries loaded), with numpy's build configuration beside it.  `single_thread` puts every
loaded OpenBLAS on one thread (run.py does, before timing): the emitted kernels, numpy's ufuncs,
numpy-quaternion and scipy's rotations run on one thread, so the dense einsum does too, and a
second busy process on this 2-core machine cannot make OpenBLAS's threads wait for each other.
"""
from __future__ import annotations

import ctypes
import os
import platform
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import numpy as np

BLAS_VARIABLES = ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE", "OPENBLAS_NUM_THREADS",
                  "OMP_NUM_THREADS")
CORENAME = ("scipy_openblas_get_corename64_", "scipy_openblas_get_corename",
            "openblas_get_corename")
GET_THREADS = ("scipy_openblas_get_num_threads64_", "scipy_openblas_get_num_threads",
               "openblas_get_num_threads")
SET_THREADS = ("scipy_openblas_set_num_threads64_", "scipy_openblas_set_num_threads",
               "openblas_set_num_threads")
PACKAGES = ("numpy", "scipy", "numba", "numpy-quaternion", "matplotlib", "sympy", "bladesmith")


def cpu() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as f:
            names = [line.split(":", 1)[1].strip() for line in f if line.startswith("model name")]
        return f"{names[0]} x {len(names)}" if names else platform.processor()
    except OSError:
        return platform.processor() or platform.machine()


def versions() -> str:
    found = []
    for name in PACKAGES:
        try:
            found.append(f"{name} {metadata.version(name)}")
        except metadata.PackageNotFoundError:
            found.append(f"{name} (not installed)")
    return ", ".join(found)


def blas_variables() -> str:
    return ", ".join(f"{v}={os.environ[v]!r}" if v in os.environ else f"{v} unset"
                     for v in BLAS_VARIABLES)


def openblas_libraries() -> list[str]:
    """Paths of the OpenBLAS libraries loaded in this process (numpy's and scipy's; Linux)."""
    try:
        with open("/proc/self/maps", encoding="utf-8") as f:
            return sorted({line.split()[-1] for line in f if "openblas" in line.lower()
                           and line.split()[-1].startswith("/")})
    except OSError:
        return []


def call(path: str, symbols: tuple[str, ...], restype, *args):
    """The first of `symbols` that the library exports, called with `args` (None: none found)."""
    lib = ctypes.CDLL(path)
    for symbol in symbols:
        fn = getattr(lib, symbol, None)
        if fn is not None:
            fn.restype = restype
            return fn(*args)
    return None


def single_thread() -> None:
    """Run every loaded OpenBLAS on one thread, like the other implementations timed."""
    for path in openblas_libraries():
        call(path, SET_THREADS, None, ctypes.c_int(1))


def blas() -> str:
    """Which BLAS kernel runs: threadpoolctl, else OpenBLAS's own answer, and numpy's config."""
    try:
        from threadpoolctl import threadpool_info
        infos = [i for i in threadpool_info() if i.get("user_api") == "blas"]
        return "; ".join(f"{i['internal_api']} {i['version']} ({Path(i['filepath']).name}), "
                         f"kernel {i.get('architecture')}, {i['num_threads']} thread(s) "
                         "(threadpoolctl)" for i in infos)
    except ImportError:
        pass
    found = [f"{Path(p).name}: kernel {describe(call(p, CORENAME, ctypes.c_char_p))}, "
             f"{call(p, GET_THREADS, ctypes.c_int)} thread(s)" for p in openblas_libraries()]
    return (f"{built_with()}; " + "; ".join(found or ["no OpenBLAS loaded"])
            + " (openblas_get_corename through ctypes; threadpoolctl is not installed)")


def describe(name: bytes | None) -> str:
    return name.decode() if name else "unknown"


def built_with() -> str:
    """numpy's BLAS from its build configuration (numpy.show_config)."""
    try:
        config = np.show_config(mode="dicts")["Build Dependencies"]["blas"]
        return f"numpy built with {config['name']} {config['version']}"
    except Exception:           # older numpy: no mode="dicts"
        return "numpy BLAS: see numpy.show_config()"


def revision(root: Path) -> str:
    """The commit measured, and whether generator/ or templates/ had uncommitted changes
    (read-only git commands; 'unknown' outside a checkout)."""
    def git(*args):
        done = subprocess.run(["git", "-C", str(root), *args], capture_output=True, text=True)
        return done.stdout.strip() if done.returncode == 0 else None
    try:
        head = git("rev-parse", "--short", "HEAD")
        dirty = git("status", "--porcelain", "--", "generator", "templates")
    except OSError:
        return "unknown"
    if head is None:
        return "unknown (not a git checkout)"
    return head + (" with uncommitted changes in generator/ or templates/" if dirty else "")


def thp_mode() -> str:
    """The transparent huge page setting in force ("madvise", ...), or "unknown"."""
    path = Path("/sys/kernel/mm/transparent_hugepage/enabled")
    try:
        text = path.read_text()
    except OSError:
        return "unknown"
    chosen = [w.strip("[]") for w in text.split() if w.startswith("[")]
    return chosen[0] if chosen else text.strip()


def facts(compiler: str, root: Path) -> list[tuple[str, str]]:
    """(label, value) rows for RESULTS.md."""
    return [("command", " ".join([os.path.basename(sys.executable)] + sys.argv)),
            ("source", revision(root)),
            ("CPU", f"{cpu()}; {os.cpu_count()} logical CPUs"),
            ("Python", f"{platform.python_version()} on {platform.platform()}"),
            ("packages", versions()),
            ("C compiler", f"{compiler}, flags -O3 -march=native"),
            ("BLAS", blas()),
            ("BLAS environment", blas_variables()),
            ("transparent huge pages", thp_mode())]
