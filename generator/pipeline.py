"""Run the stages for one spec: load -> model -> derive -> optimize -> emit -> manifest -> write.

Everything is derived and rendered in memory first; files are written only when every kernel of
every target succeeded, so a failing spec never leaves partial output.
"""
from __future__ import annotations

import gc
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from . import budget, derive, manifest, model, spec as spec_mod
from .emit import emitter
from .files import display_path, output_dir, write_files
from .ir import Module
from .optimize import optimize_kernel


@dataclass(frozen=True)
class Build:
    spec: spec_mod.Spec
    module: Module
    out_dir: Path
    files: dict            # file name -> text, manifest included

    @property
    def manifest_name(self) -> str:
        return f"{self.module.name}.manifest.json"


def derive_module(spec: spec_mod.Spec, progress=None, max_terms: int | None = None) -> Module:
    """`progress(done, total, label)`, when given, is called after each kernel; a spec whose
    estimated cost exceeds `max_terms` (None: `budget.limit()`) is refused before deriving."""
    budget.check_types(spec, max_terms)
    m = model.build(spec)
    budget.check_kernels(m, max_terms)
    kernels, extra, inferred = [], {}, []
    for ks in spec.kernels:
        kernel, new_types = derive.derive(m, ks, extra)
        for t in new_types:
            extra[t.name] = t
            inferred.append((t, ks.key))
        kernels.append(optimize_kernel(kernel))
        if progress is not None:
            progress(len(kernels), len(spec.kernels), spec.display)
    model.check_names(m, tuple(inferred))
    types = tuple(m.types.values()) + tuple(extra.values())
    return Module(name=spec.name, spec_path=display_path(spec.path), spec_digest=spec.digest,
                  basis=spec.basis, metric=spec.metric, types=types, kernels=tuple(kernels),
                  targets=spec.targets, preferred=spec.blade_names)


def render(module: Module) -> dict[str, str]:
    files: dict[str, str] = {}
    for target, options in module.targets.items():
        files.update(emitter(target, options).files(module))
    files[f"{module.name}.manifest.json"] = manifest.build(module, files)
    return files


@contextmanager
def no_cyclic_gc():
    """Pause the cyclic garbage collector: a build allocates millions of small acyclic objects,
    and collecting them cost 30 % of the full 8-D product (bench/profile_build.py)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def build(path: str | Path, cli_out: str | None = None, display: str | None = None,
          progress=None, max_terms: int | None = None) -> Build:
    spec = spec_mod.load(path, display)
    out = output_dir(spec, cli_out)
    with no_cyclic_gc():
        module = derive_module(spec, progress, max_terms)
        files = render(module)
    return Build(spec, module, out, files)


def write(b: Build) -> list[tuple[str, str]]:
    return write_files(b.out_dir, b.files)
