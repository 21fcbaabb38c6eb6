"""Benchmarks of bladesmith (issue 8): emitted kernels and generation, beside numpy,
numpy-quaternion and scipy, all in one run.

    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python bench/run.py            # full, ~2 minutes
    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python bench/run.py --quick    # < 1 minute

Needs the bench extras (`pip install -e ".[bench]"`: scipy, numpy-quaternion, matplotlib; the
test extras include them) and a C compiler.  The OpenBLAS variables are unset because this
project's machines set them to values that slow numpy's matrix products (the dense einsum) down;
RESULTS.md records what was in force and which BLAS kernel ran (envinfo.py).

A full run prints every table as markdown and writes bench/RESULTS.md and bench/results.png;
`--quick` (N = 10^4 and 10^5, fewer repetitions and dimensions) writes them to a temporary
directory unless `--out` is given, so it never replaces the figures of record.  Sections:
the figures of issue 8 item 2 (met / NOT met), kernel throughput (cases.py), single-element
calls, generation time (gentime.py), operation counts (opcounts.py), the environment.
Timing: measure.py; no test asserts on any of it.
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

import envinfo  # noqa: E402
import gentime  # noqa: E402
import goals  # noqa: E402
import loaders  # noqa: E402
import opcounts  # noqa: E402
import report  # noqa: E402
import throughput  # noqa: E402
from profile_build import cse_share  # noqa: E402
from throughput import log  # noqa: E402


@dataclass(frozen=True)
class Settings:
    sizes: tuple[int, ...]      # N for the throughput cases: in cache, then memory bound
    reps: int                   # repetitions of every timing
    min_time: float             # seconds one repetition lasts at least
    gen_reps: int               # repetitions of every build
    quick: bool


FULL = Settings((10 ** 4, 10 ** 6), reps=9, min_time=0.1, gen_reps=3, quick=False)
QUICK = Settings((10 ** 4, 10 ** 5), reps=3, min_time=0.01, gen_reps=1, quick=True)


def examples() -> list[Path]:
    return sorted((ROOT / "specs").glob("*.toml"))


def build_examples(tmp: Path) -> dict:
    """{spec name: loaders.Built} of every example, built with the CLI into `tmp`."""
    return {p.stem: loaders.build(p, tmp / "examples" / p.stem) for p in examples()}


def measure_everything(s: Settings, tmp: Path) -> dict:
    import quaternion  # noqa: F401  (load every library that brings an OpenBLAS, then
    import scipy.spatial.transform  # noqa: F401  put them all on one thread)
    envinfo.single_thread()
    for name in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE"):
        if name in os.environ:
            log(f"note: {name} is set; it can slow the einsum baseline (see bench/run.py)")
    log("building the examples")
    built = build_examples(tmp)
    ctx = throughput.setup(built, ROOT / "specs", tmp)
    log("checking C, numba and einsum agree")
    found = {"agreement": throughput.check(ctx), "ctx": ctx, "built": built}
    log("kernel throughput")
    found["results"] = throughput.kernels(ctx, s.sizes, s.reps, s.min_time)
    found["singles"] = throughput.singles(ctx, s.reps, s.min_time)
    log("generation time")
    found["gen"] = gentime.measure_all(examples(), tmp / "gen", s.gen_reps, s.quick, log)
    found["counts"] = [row for p in examples() for row in opcounts.rows(p, built[p.stem].manifest)]
    found["cse"] = cse_share(ROOT / "specs" / "arm.toml")
    return found


def evaluate(s: Settings, found: dict) -> list:
    kernels = [(r["op"], r["applied"]) for r in found["counts"]]
    kernels += [k for r in found["gen"] if r["family"] != "example" for k in r["applied"]]
    return goals.evaluate(found["results"], s.sizes, found["singles"], found["gen"],
                          gentime.growth(found["gen"]), kernels, found["cse"][1],
                          found["ctx"].notes)


def markdown(s: Settings, found: dict, targets: list, seconds: float) -> str:
    ctx, sizes = found["ctx"], s.sizes
    facts = envinfo.facts(loaders.compiler_version(), ROOT)
    sections = [
        "# Benchmark results\n\nWritten by `bench/run.py`"
        + (" **--quick (a smoke run, not the figures of record)**" if s.quick else "")
        + f" in {seconds:.0f} s; regenerate, do not edit.  Medians of {s.reps} repetitions "
        "(einsum at the largest N: 3), [min–max] beside them; ratios are of medians.  The "
        "implementations of a case are timed in rounds, one repetition of each per round.",
        "## Environment\n\n" + report.table(("", ""), facts),
        "## Targets (issue 8, item 2)\n\n" + report.goals_table(targets) + "\n\n" + goals.READING,
        "## Kernel throughput (ns per element, float64)\n\n"
        + report.throughput_table(found["results"], sizes) + "\n\n"
        + report.notes_list(ctx.notes, found["agreement"]) + "\n\n" + METHOD
        + huge_pages(ctx.huge, max(sizes)),
        "### Ratios (same run)\n\n" + report.ratio_table(found["results"], sizes),
        "## Single-element calls from Python (µs per call)\n\n"
        + report.singles_table(found["singles"]),
        "## Generation time\n\n" + report.generation_table(found["gen"]) + "\n\n"
        + f"Growth slope (log time against log terms, full products >= 1,000 terms): "
          f"{gentime.growth(found['gen']):.2f}.  " + GENERATION,
        "## Operation counts\n\n" + report.counts_table(found["counts"]) + "\n\n" + COUNTS,
    ]
    return "\n\n".join(sections) + "\n"


def huge_pages(shares: dict, n: int) -> str:
    """A sentence on how much of the timed arrays the kernel backed with huge pages."""
    if not shares:
        return ""
    low, high = min(shares.values()), max(shares.values())
    return (f"  At N = {n:,}, huge pages backed {100 * low:.0f}-{100 * high:.0f} % of each case's "
            f"arrays (/proc/self/smaps; transparent huge pages: {envinfo.thp_mode()}).")


METHOD = (
    "C: `NAME_K_n` (`NAME_K_fixed_n` for one element against N when the header has it), "
    "compiled `-O3 -march=native`, looped in C so ctypes is paid once per repetition.  numba: "
    "`K_batch(a, b, out=out)`, its argument checks included.  stream: numpy moving the same "
    "bytes as the kernel (`np.add(x, y, out=z)` on contiguous arrays, plus `np.add.reduce` or "
    "`np.copyto` for the rest; exactly `np.add(a, b, out=c)` when both arguments and the result "
    "have one width).  numpy-quaternion: `np.multiply(qa, qb, out=qc)`.  scipy: `Rotation.apply` "
    "of a `Rotation` made before timing (it allocates its result).  einsum: dense multivectors "
    "and the full 2^n x 2^n x 2^n tensor from `generator.reference`, in chunks of 4,096 rows "
    "(dense.py).  Everything runs on one thread: OpenBLAS (einsum) is set to one thread too.  "
    "Every array timed has its own 2 MiB-aligned mapping advised for huge pages (memory.py), so "
    "a kernel and its stream sit on the same kind of pages.")
GENERATION = (
    "In process: `pipeline.build` and `pipeline.write` of all three targets and the manifest "
    "into a fresh directory, median [min–max]; CLI: one `bladesmith build SPEC --out DIR -q` "
    "(start-up and imports included).  Terms: summands of the manifest's formulas.")
COUNTS = (
    "dense: 4^n multiplies per geometric product of two full multivectors (2 x 4^n for a "
    "sandwich); naive: V X and then (V X) ~V as two expanded products, from `generator.derive` "
    "as in tests/test_versor.py.  Counts from the manifests of this run's builds.")


def parse(argv) -> tuple[Settings, Path | None]:
    parser = argparse.ArgumentParser(description=" ".join(__doc__.split("\n\n")[0].split()))
    parser.add_argument("--quick", action="store_true", help="a smoke run (under a minute)")
    parser.add_argument("--out", type=Path, help="where RESULTS.md and results.png go "
                        "(default bench/, or a temporary directory with --quick)")
    args = parser.parse_args(argv)
    settings = QUICK if args.quick else FULL
    return settings, args.out or (None if args.quick else HERE)


BENCH_MODULES = {"quaternion": "numpy-quaternion", "scipy": "scipy", "matplotlib": "matplotlib"}


def require_extras() -> None:
    """Stop with a clear message, before two minutes of timing, if a bench extra is missing."""
    import importlib.util
    missing = [pkg for mod, pkg in BENCH_MODULES.items() if importlib.util.find_spec(mod) is None]
    if missing:
        raise SystemExit(f"bench: {', '.join(missing)} not installed; "
                         "run `python -m pip install -e \".[bench]\"` first")


def main(argv=None) -> None:
    settings, out = parse(argv)
    require_extras()
    start = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="bladesmith-bench-") as tmp:
        found = measure_everything(settings, Path(tmp))
    targets = evaluate(settings, found)
    text = markdown(settings, found, targets, time.perf_counter() - start)
    print(text)
    out = out or Path(tempfile.mkdtemp(prefix="bladesmith-bench-quick-"))
    out.mkdir(parents=True, exist_ok=True)
    (out / "RESULTS.md").write_text(text, encoding="utf-8")
    report.plot(out / "results.png", found["results"], settings.sizes, found["gen"],
                found["counts"])
    log(f"wrote {out / 'RESULTS.md'} and {out / 'results.png'}")


if __name__ == "__main__":
    main()
