"""The manifest (DESIGN section 5): what was generated, from what, with which formulas and costs.

The manifest is JSON with a fixed key order, so it is byte-stable and diffs cleanly.  Formula
text is canonical: terms in variable order, `2*a.e12*b.e02`, exact rational coefficients.
"""
from __future__ import annotations

import hashlib
import json
from fractions import Fraction

from . import __version__
from .ir import Formula, Kernel, Module


def coef_text(c: Fraction) -> str:
    return str(c.numerator) if c.denominator == 1 else f"{c.numerator}/{c.denominator}"


def formula_text(fm: Formula) -> str:
    if fm.text is not None:
        return fm.text
    if not fm.terms:
        return "0"
    out = []
    for i, t in enumerate(fm.terms):
        mag = abs(t.coef)
        factors = [f"{f.arg}.{f.comp}" for f in t.factors]
        body = "*".join(([coef_text(mag)] if mag != 1 or not factors else []) + factors)
        sign = "-" if t.coef < 0 else "+"
        out.append((f"-{body}" if sign == "-" else body) if i == 0 else f" {sign} {body}")
    return "".join(out)


def kernel_entry(k: Kernel) -> dict:
    prog = k.program
    entry = {"name": k.name, "op": k.op, "args": list(k.args), "result": k.result}
    if k.grades is not None:
        entry["grades"] = list(k.grades)
    entry["formulas"] = {fm.comp: formula_text(fm) for fm in k.formulas}
    entry["counts"] = prog.counts.as_dict()
    entry["forms"] = {name: c.as_dict() for name, c in prog.forms}
    entry["chosen"] = prog.form
    entry["applied"] = list(prog.applied)
    return entry


def metric_entry(metric) -> list:
    n = len(metric)
    if all(metric[i][j] == 0 for i in range(n) for j in range(n) if i != j):
        return [coef_text(metric[i][i]) for i in range(n)]
    return [[coef_text(x) for x in row] for row in metric]


def build(module: Module, files: dict[str, str]) -> str:
    doc = {
        "tool": "bladesmith",
        "version": __version__,
        "spec": {"path": module.spec_path, "sha256": module.spec_digest},
        "algebra": {"name": module.name, "basis": list(module.basis),
                    "metric": metric_entry(module.metric), "blades": list(module.preferred)},
        "types": {t.name: [c.name for c in t.components] for t in module.types},
        "kernels": [kernel_entry(k) for k in module.kernels],
        "files": {name: hashlib.sha256(files[name].encode("utf-8")).hexdigest()
                  for name in sorted(files)},
    }
    return json.dumps(doc, indent=2, ensure_ascii=True) + "\n"


def read(text: str) -> dict:
    return json.loads(text)
