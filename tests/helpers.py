"""Shared helpers for the tests: build a spec from text, import its Python target, evaluate."""
from __future__ import annotations

import textwrap
from dataclasses import replace
from pathlib import Path

import numpy as np

from generator import pipeline, spec as spec_mod, verify

ROOT = Path(__file__).resolve().parent.parent
SPECS = sorted((ROOT / "specs").glob("*.toml"))


def write_spec(tmp_path: Path, text: str, name: str = "spec.toml") -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(text))
    return path


def build_python(path: Path, out: Path):
    """Derive a spec, emit only the Python target into `out`, import it: (module IR, emitted)."""
    spec = spec_mod.load(path)
    module = replace(pipeline.derive_module(spec), targets={"python": {}})
    b = pipeline.Build(spec, module, out, pipeline.render(module))
    pipeline.write(b)
    return module, verify.load_python(out / f"{module.name}.py", f"t{abs(hash(str(out)))}")


def kernel(module, name):
    return next(k for k in module.kernels if k.name == name)


def components(module, type_name):
    return [c.ident for c in module.type(type_name).components]


def as_dict(module, type_name, values) -> dict:
    return dict(zip(components(module, type_name), values))


def from_dict(module, type_name, values: dict) -> list[float]:
    unknown = set(values) - set(components(module, type_name))
    assert not unknown, f"components {unknown} are not in {type_name}"
    return [values.get(c, 0.0) for c in components(module, type_name)]


def rng(seed: int = 7):
    return np.random.default_rng(seed)
