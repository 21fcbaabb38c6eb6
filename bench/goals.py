"""The figures of issue 8, item 2, checked against one run's measurements.

Every ratio is of medians from the same run.  A `Goal` row names the figure, the measured value,
the threshold and whether it is met; `evaluate` returns them in the issue's order.  How figures
the issue leaves open are read is `READING`, printed under the table in RESULTS.md.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

from cases import CASES, OURS
from generator.ops import CATALOGUE

BILINEAR_KINDS = {"bilinear", "commutator", "regressive"}
READING = """How the figures the issue leaves open are read:
- "C and numba batch kernels within 1.2x of the streaming baseline": every case, each target;
- "one rotor on N vectors within 1.5x of scipy's single-rotation apply": at every N timed;
- "every emitted kernel 30x faster than the dense einsum": every case timed, each target;
- a build's time is the in-process median, or the one CLI run when that is slower;
- "growth linear in the number of emitted terms": the slope of log(time) against log(terms)
  over the full-product builds of at least 1,000 terms is at most 1.15 (1: proportional);
- "CSE must not dominate": no bilinear kernel (geometric, outer, the inner products,
  commutator, regressive) has `cse` among its applied optimizations, every kernel's manifest
  entry says what was applied, and sympy's `cse` takes under half of a warm, profiled build
  of specs/arm.toml."""


NO_FMA = ("numba runs without FMA contraction (emit/numba.py: the same row rounds alike in "
          "every loop), the C build (GNU C, -march=native) with it")


@dataclass(frozen=True)
class Goal:
    figure: str
    measured: str
    target: str
    met: bool
    note: str = ""              # facts of the same run that explain a figure not met


def case(kernel: str, spec: str = "drone", one: bool = False):
    return next(c for c in CASES if (c.spec, c.kernel, c.one) == (spec, kernel, one))


def ratio(results: dict, c, n: int, num: str, den: str) -> float:
    row = results[(c.label, n)]
    return row[num].median / row[den].median


def at_most(figure: str, value: float, limit: float, unit: str = "x") -> Goal:
    return Goal(figure, f"{value:.2f}{unit}", f"<= {limit:g}{unit}", value <= limit)


def at_least(figure: str, value: float, limit: float, unit: str = "x") -> Goal:
    return Goal(figure, f"{value:.1f}{unit}", f">= {limit:g}{unit}", value >= limit)


def explained(goal: Goal, note: str) -> Goal:
    """The goal with `note` attached when it is not met."""
    return goal if goal.met else replace(goal, note=note)


def streaming(results: dict, sizes, notes: dict) -> list[Goal]:
    big, small = max(sizes), min(sizes)

    def why(c, impl):
        own = [n for n in notes.get(c.label, []) if n.startswith(f"{impl}:")]
        cache, row = results[(c.label, small)], results[(c.label, big)]
        other = next(o for o in OURS if o != impl)
        best = row[impl].low / row["stream"].low
        stream = row["stream"].median
        share = 100 * cache[impl].median / stream
        return "; ".join(own + [
            f"in cache (N = {small:,}) {impl} takes {cache[impl].median:.2f} ns per element "
            f"({other}: {cache[other].median:.2f}), {share:.0f} % of the stream's time at "
            f"N = {big:,} ({stream:.2f} ns) for the arithmetic alone; the fastest repetitions: "
            f"{best:.2f}x"] + ([NO_FMA] if impl == "numba" else []))
    return [explained(at_most(f"{impl} `{c.kernel}` ({c.label}) / streaming baseline, "
                              f"N = {big:,}", ratio(results, c, big, impl, "stream"), 1.2),
                      why(c, impl))
            for c in CASES for impl in OURS]


def quaternion(results: dict, big: int, small: int) -> list[Goal]:
    rotor = case("compose")
    return [at_most(f"numba rotor product / numpy-quaternion, N = {big:,}",
                    ratio(results, rotor, big, "numba", "numpy-quaternion"), 1.0),
            at_most(f"numba rotor product / numpy-quaternion, N = {small:,}",
                    ratio(results, rotor, small, "numba", "numpy-quaternion"), 1.3),
            at_most(f"C rotor product / numpy-quaternion, N = {small:,}",
                    ratio(results, rotor, small, "C", "numpy-quaternion"), 1.0)]


def singles(rows: list) -> list[Goal]:
    stats = dict(rows)
    python, numba = (stats[label].median for label, _ in rows[:2])
    return [at_most("Python target rotor product, one call from Python", python, 2.0, " µs"),
            at_most("numba scalar rotor product, one call from Python", numba, 1.0, " µs")]


def scipy(results: dict, sizes) -> list[Goal]:
    many, one, big = case("rotate"), case("rotate", one=True), max(sizes)
    goals = [at_least(f"scipy `Rotation.apply` / {impl}, N rotors on N vectors, N = {big:,}",
                      ratio(results, many, big, "scipy", impl), 10) for impl in OURS]
    return goals + [at_most(f"{impl} / scipy single-rotation `apply`, one rotor on N = {n:,}",
                            ratio(results, one, n, impl, "scipy"), 1.5)
                    for n in sizes for impl in OURS]


def einsum(results: dict, big: int) -> list[Goal]:
    def why(c, impl):
        bound = ratio(results, c, big, "einsum", "stream")
        return (f"einsum / stream = {bound:.1f}x: a kernel as fast as streaming its bytes would "
                f"reach {bound:.1f}x; {impl} is at {ratio(results, c, big, impl, 'stream'):.2f}x "
                "of the stream")
    return [explained(at_least(f"dense einsum / {impl}, {c.label}, N = {big:,}",
                               ratio(results, c, big, "einsum", impl), 30), why(c, impl))
            for c in CASES for impl in OURS]


def seconds(row: dict) -> float:
    """A build's time for the goals: the in-process median, or the CLI run when slower."""
    return max(row["median"], row.get("cli", 0.0))


def generation(rows: list[dict], slope: float) -> list[Goal]:
    full = [r for r in rows if r["family"] == "full product"]
    largest = max(full, key=lambda r: r["n"])
    vector = max((r for r in rows if r["family"] not in ("full product", "example")), key=seconds)
    goals = [at_most(f"build of the full {largest['n']}-D product ({largest['terms']:,} terms), "
                     "all targets", seconds(largest), 20, " s"),
             at_most(f"slowest vector/bivector build, n <= 16 ({vector['family']}, n = "
                     f"{vector['n']})", seconds(vector), 2, " s")]
    goals += [at_most(f"build of specs/{r['spec']}.toml", seconds(r), 5, " s")
              for r in rows if r["family"] == "example"]
    return goals + [at_most("growth: slope of log time against log terms (full products, "
                            ">= 1,000 terms)", slope, 1.15, "")]


def cse(kernels: list[tuple[str, tuple | None]], share: float) -> list[Goal]:
    """`kernels`: (op, applied) of every kernel built in the run."""
    bilinear = [a for op, a in kernels if CATALOGUE[op].kind in BILINEAR_KINDS]
    with_cse = sum(1 for a in bilinear if a and "cse" in a)
    silent = sum(1 for _, a in kernels if a is None)
    return [Goal("bilinear kernels with `cse` applied", f"{with_cse} of {len(bilinear)}", "0",
                 with_cse == 0),
            Goal("kernels whose manifest entry does not say what was applied",
                 f"{silent} of {len(kernels)}", "0", silent == 0),
            at_most("share of sympy `cse` in a build of specs/arm.toml (cProfile)",
                    100 * share, 50, " %")]


def evaluate(results, sizes, single_rows, gen_rows, slope, kernels, share, notes) -> list[Goal]:
    big, small = max(sizes), min(sizes)
    return (streaming(results, sizes, notes) + quaternion(results, big, small)
            + singles(single_rows) + scipy(results, sizes) + einsum(results, big)
            + generation(gen_rows, slope)
            + cse(kernels, share))
