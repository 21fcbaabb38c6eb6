"""Operation counts of the example kernels, from the manifests, beside the dense and naive costs.

- `dense`: a generic library multiplies two full multivectors with (2^n)^2 = 4^n multiplies per
  geometric product (a sandwich: two products, 2 * 4^n); unary kernels and add/sub have none.
- `naive`: for a sandwich V X ~V, the cost of the two expanded bilinear products V X and then
  (V X) ~V, computed with `generator.derive` as `tests/test_versor.py::naive_sandwich_cost`
  does: one multiply per term of V X, and two per product of a component of V X with one of ~V.
- `terms`: the number of terms of a kernel's canonical formulas in the manifest (summands at
  the top level of each component's formula), the measure of generation work.
"""
from __future__ import annotations

from pathlib import Path

from generator import derive, model, spec as spec_mod

NO_PRODUCT = {"add", "sub"}


def terms(formula: str) -> int:
    """Top-level summands of a canonical formula text ("0" has none)."""
    text = formula.strip()
    if text in ("", "0"):
        return 0
    depth, count = 0, 1
    for i, ch in enumerate(text):
        depth += {"(": 1, ")": -1}.get(ch, 0)
        if depth == 0 and ch in "+-" and text[i - 1:i] == " " and text[i + 1:i + 2] == " ":
            count += 1
    return count


def kernel_terms(kernel: dict) -> int:
    return sum(terms(f) for f in kernel["formulas"].values())


def manifest_terms(manifest: dict) -> int:
    return sum(kernel_terms(k) for k in manifest["kernels"])


def manifest_counts(manifest: dict) -> tuple[int, int]:
    """(multiplies, adds) summed over the manifest's kernels."""
    ks = manifest["kernels"]
    return sum(k["counts"]["mul"] for k in ks), sum(k["counts"]["add"] for k in ks)


def applied(kernel: dict) -> tuple[str, ...] | None:
    """The optimizations the manifest says were applied (None: it does not say)."""
    return tuple(kernel["applied"]) if "applied" in kernel else None


def dense_count(kernel: dict, n: int) -> int | None:
    if len(kernel["args"]) < 2 or kernel["op"] in NO_PRODUCT:
        return None
    return (2 if kernel["op"] == "sandwich" else 1) * 4 ** n


def naive_sandwich(spec_path: Path, v: str, x: str) -> int:
    """Multiplies of V X then (V X) ~V, each expanded (see the module docstring)."""
    m = model.build(spec_mod.load(spec_path))
    mvs = derive.Variables([("a", m.types[v]), ("b", m.types[x])]).mvs
    first = derive.prune(derive.bilinear(m.algebra, derive.CATALOGUE["geometric"].keep, *mvs), None)
    return sum(len(p) for p in first.values()) + 2 * len(first) * len(m.types[v].components)


def rows(spec_path: Path, manifest: dict) -> list[dict]:
    """One row per kernel: counts, forms, dense and naive costs."""
    n = len(manifest["algebra"]["basis"])
    out = []
    for k in manifest["kernels"]:
        naive = naive_sandwich(spec_path, *k["args"]) if k["op"] == "sandwich" else None
        out.append({"spec": manifest["algebra"]["name"], "kernel": k["name"], "op": k["op"],
                    "signature": f"{', '.join(k['args'])} -> {k['result']}",
                    "counts": k["counts"], "terms": kernel_terms(k), "dense": dense_count(k, n),
                    "naive": naive, "chosen": k.get("chosen", ""),
                    "applied": applied(k)})
    return out
