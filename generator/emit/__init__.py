"""Emitters, one per target, registered by target name.

Adding a target: subclass `base.Emitter`, add its templates under `templates/<target>/`, and
register the class in `TARGETS` below (see DEVELOPERS.md).
"""
from __future__ import annotations

from .base import Emitter
from .c import CEmitter
from .numba import NumbaEmitter
from .python import PythonEmitter

TARGETS: dict[str, type[Emitter]] = {
    "python": PythonEmitter,
    "numba": NumbaEmitter,
    "c": CEmitter,
}


def emitter(target: str, options: dict | None = None) -> Emitter:
    return TARGETS[target](options)
