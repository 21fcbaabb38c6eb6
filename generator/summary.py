"""Machine-readable summary of a build (`bladesmith build --json`).

One entry per spec: the algebra, the output directory, each kernel's signature and operation
counts (the same numbers the manifest records), and whether each file was written or left
unchanged.  Key order is fixed, so the summary is stable for the same build.
"""
from __future__ import annotations

import json


def build_entry(b, status) -> dict:
    return {"spec": b.spec.display, "algebra": b.module.name, "out": str(b.out_dir),
            "kernels": [{"name": k.name, "op": k.op, "args": list(k.args), "result": k.result,
                         "counts": k.program.counts.as_dict()} for k in b.module.kernels],
            "files": {name: state for name, state in status}}


def build_json(results) -> str:
    """`results`: (pipeline.Build, [(file name, "written" | "unchanged"), ...]) pairs."""
    return json.dumps({"builds": [build_entry(b, s) for b, s in results]}, indent=2,
                      ensure_ascii=True)
