"""Profile one build with cProfile and summarize where its time goes.

    python bench/profile_build.py specs/arm.toml        # any spec
    python bench/profile_build.py --full 8              # the full product of two 8-D multivectors
    python bench/profile_build.py specs/arm.toml --top 25
    python bench/profile_build.py specs/arm.toml --warm # after one unprofiled build (imports done)

The build is `generator.pipeline.build` then `pipeline.write` into a temporary directory, the
work of `bladesmith build` without interpreter start-up.  Printed: the total, own time grouped
by module (generator/<file>, a package, or built-in), and the top functions by own and by
cumulative time.  run.py uses `cse_share` to report how much of a build sympy's `cse` takes.
cProfile slows Python code by about two times, so read the shares, not the seconds.
"""
from __future__ import annotations

import argparse
import cProfile
import pstats
import re
import sys
import tempfile
from collections import Counter
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from generator import pipeline  # noqa: E402


def profile(spec: Path, out: Path, warm: bool = False) -> pstats.Stats:
    """cProfile statistics of building `spec` into `out` (after one unprofiled build if `warm`)."""
    if warm:
        pipeline.write(pipeline.build(spec, str(out / "warm")))
    profiler = cProfile.Profile()
    profiler.enable()
    pipeline.write(pipeline.build(spec, str(out)))
    profiler.disable()
    return pstats.Stats(profiler)


def group(filename: str) -> str:
    """generator/<file>, the package under site-packages, `built-in`, or the stdlib module."""
    if filename.startswith("<frozen"):
        return "import system"
    if filename.startswith("~") or filename.startswith("<"):
        return "built-in"
    parts = Path(filename).parts
    if "generator" in parts:
        return "generator/" + "/".join(parts[parts.index("generator") + 1:])
    if "site-packages" in parts:
        return parts[parts.index("site-packages") + 1].split(".")[0]
    return "stdlib " + Path(filename).stem


def by_group(stats: pstats.Stats) -> Counter:
    """Own time in seconds per module group."""
    totals = Counter()
    for (filename, _, _), (_, _, own, _, _) in stats.stats.items():
        totals[group(filename)] += own
    return totals


def top(stats: pstats.Stats, key: int, count: int) -> list[tuple[str, int, float, float]]:
    """[(function, calls, own s, cumulative s)], sorted by field `key` (2: own, 3: cumulative)."""
    rows = sorted(stats.stats.items(), key=lambda item: -item[1][key])[:count]
    return [(label(f), calls, own, cum) for f, (_, calls, own, cum, _) in rows]


def label(func: tuple) -> str:
    filename, line, name = func
    return name if filename.startswith("~") else f"{group(filename)}:{line} {name}"


def cumulative(stats: pstats.Stats, file_pattern: str, name: str) -> float:
    """Cumulative seconds of the functions called `name` in files matching `file_pattern`."""
    return sum(cum for (f, _, n), (_, _, _, cum, _) in stats.stats.items()
               if n == name and re.search(file_pattern, f))


def cse_share(spec: Path) -> tuple[float, float]:
    """(profiled build seconds, fraction of them inside sympy's cse) for one spec."""
    with tempfile.TemporaryDirectory(prefix="bladesmith-profile-") as tmp:
        stats = profile(spec, Path(tmp), warm=True)
    return stats.total_tt, cumulative(stats, r"cse_main\.py$", "cse") / stats.total_tt


def full_spec(n: int, tmp: Path) -> Path:
    from gentime import spec_text
    path = tmp / f"full{n}.toml"
    path.write_text(spec_text(f"full{n}", n, "mv", "mv", "geometric"), encoding="utf-8")
    return path


def report(stats: pstats.Stats, count: int) -> str:
    total = stats.total_tt
    lines = [f"total {total:.2f} s (under cProfile)", "", "own time by module:"]
    lines += [f"  {share / total:6.1%}  {name}"
              for name, share in by_group(stats).most_common(count)]
    for title, key in (("own", 2), ("cumulative", 3)):
        lines += ["", f"top functions by {title} time (calls, own s, cumulative s):"]
        lines += [f"  {calls:9,} {own:7.3f} {cum:7.3f}  {name}"
                  for name, calls, own, cum in top(stats, key, count)]
    return "\n".join(lines)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=" ".join(__doc__.split("\n\n")[0].split()))
    parser.add_argument("spec", nargs="?", type=Path, help="a spec file")
    parser.add_argument("--full", type=int, metavar="N", help="the full product in N dimensions")
    parser.add_argument("--top", type=int, default=15, help="rows per list (default 15)")
    parser.add_argument("--warm", action="store_true", help="profile a second build (imports done)")
    args = parser.parse_args(argv)
    if (args.spec is None) == (args.full is None):
        parser.error("give a SPEC or --full N")
    with tempfile.TemporaryDirectory(prefix="bladesmith-profile-") as tmp:
        spec = args.spec or full_spec(args.full, Path(tmp))
        print(report(profile(spec, Path(tmp) / "out", args.warm), args.top))


if __name__ == "__main__":
    main()
