"""Generation time: builds of growing products and of each example spec, with their terms.

Families (`FAMILIES`), each one spec per n with one kernel, Euclidean metric, basis e1 ... e9,
ea ... eg (one character per index, so blade names stay short):

- the geometric product of two full multivectors (all grades), n = 3 ... 8 (4^n terms);
- vector-by-vector and vector-by-bivector outer and geometric products, n = 3 ... 16.

Each build is timed in process, `generator.pipeline.build` then `pipeline.write` (all three
targets and the manifest), into a fresh directory per repetition so every file is written;
untimed builds of the examples first pay the one-off imports and template compilation.  The
command line `bladesmith build SPEC --out DIR -q` is also timed once (wall clock, interpreter
start-up and imports included) for the examples and for the largest build of each family.
Terms come from the written manifest (opcounts.terms).
"""
from __future__ import annotations

import json
import math
import statistics
import subprocess
from pathlib import Path

import loaders
import opcounts
from generator import pipeline
from measure import wall

INDEX = "123456789abcdefg"
FAMILIES = (
    # label, first type, second type, op, dimensions
    ("full product", "mv", "mv", "geometric", range(3, 9)),
    ("vector outer vector", "vec", "vec", "outer", range(3, 17)),
    ("vector geometric vector", "vec", "vec", "geometric", range(3, 17)),
    ("vector outer bivector", "vec", "biv", "outer", range(3, 17)),
    ("vector geometric bivector", "vec", "biv", "geometric", range(3, 17)),
)
QUICK_DIMENSIONS = {3, 5, 8, 12, 16}


def spec_text(name: str, n: int, a: str, b: str, op: str) -> str:
    grades = {"mv": list(range(n + 1)), "vec": [1], "biv": [2]}
    basis = ", ".join(f'"e{INDEX[i]}"' for i in range(n))
    types = "".join(f"[types.{t}]\ngrades = {grades[t]}\n" for t in dict.fromkeys((a, b)))
    return (f'[algebra]\nname = "{name}"\nbasis = [{basis}]\nmetric = {[1] * n}\n{types}'
            f'[[kernels]]\nop = "{op}"\nargs = ["{a}", "{b}"]\nname = "product"\n')


def family_specs(tmp: Path, quick: bool):
    """[(family label, n, spec path)] for every family and dimension."""
    out = []
    for f, (label, a, b, op, dims) in enumerate(FAMILIES):
        for n in (d for d in dims if not quick or d in QUICK_DIMENSIONS or label == "full product"):
            path = tmp / f"gen{f}_{n}.toml"
            path.write_text(spec_text(f"gen{f}_{n}", n, a, b, op), encoding="utf-8")
            out.append((label, n, path))
    return out


def build_once(path: Path, out: Path) -> tuple[float, Path]:
    """Seconds to build and write `path` into `out`, and the manifest written."""
    seconds, b = wall(lambda: pipeline.write(pipeline.build(path, str(out))))
    return seconds, next(out.glob("*.manifest.json"))


def time_build(path: Path, out: Path, reps: int) -> dict:
    """Median, min and max seconds over `reps` builds, and the manifest's counts."""
    runs = [build_once(path, out / f"rep{i}") for i in range(reps)]
    times = [t for t, _ in runs]
    manifest = json.loads(runs[0][1].read_text(encoding="utf-8"))
    mul, add = opcounts.manifest_counts(manifest)
    return {"median": statistics.median(times), "low": min(times), "high": max(times),
            "reps": reps, "terms": opcounts.manifest_terms(manifest), "mul": mul, "add": add,
            "applied": [(k["op"], opcounts.applied(k)) for k in manifest["kernels"]]}


def cli_seconds(path: Path, out: Path) -> float:
    """Wall seconds of `bladesmith build PATH --out OUT -q` (one run)."""
    cmd = loaders.cli() + ["build", str(path), "--out", str(out), "-q"]
    return wall(lambda: subprocess.run(cmd, check=True))[0]


def warm_up(tmp: Path, examples: list[Path]) -> None:
    """Build each example once, untimed: imports (sympy's cse among them) and templates load."""
    for path in examples:
        build_once(path, tmp / "warm" / path.stem)


def measure_all(examples: list[Path], tmp: Path, reps: int, quick: bool, log) -> list[dict]:
    """One row per build: family, n, seconds (in process), CLI seconds where timed, terms."""
    tmp.mkdir(parents=True, exist_ok=True)
    warm_up(tmp, examples)
    jobs = family_specs(tmp, quick)
    jobs += [("example", None, p) for p in examples]
    largest = {label: max(n for l, n, _ in jobs if l == label) for label, n, _ in jobs if n}
    rows = []
    for label, n, path in jobs:
        log(f"  build {path.name}")
        row = {"family": label, "n": n, "spec": path.stem,
               **time_build(path, tmp / path.stem, reps)}
        if n is None or n == largest[label]:
            row["cli"] = cli_seconds(path, tmp / path.stem / "cli")
        rows.append(row)
    return rows


def growth(rows: list[dict], family: str = "full product", min_terms: int = 1000) -> float:
    """Slope of log(seconds) against log(terms) over a family's builds of at least `min_terms`
    (1: time proportional to terms; below 1: fixed costs still show)."""
    points = [(math.log(r["terms"]), math.log(r["median"])) for r in rows
              if r["family"] == family and r["terms"] >= min_terms]
    if len(points) < 2:
        return float("nan")
    mx, my = (statistics.fmean(c) for c in zip(*points))
    sxy = sum((x - mx) * (y - my) for x, y in points)
    return sxy / sum((x - mx) ** 2 for x, _ in points)

