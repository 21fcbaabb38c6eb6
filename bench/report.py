"""Markdown tables and the PNG plot of one run (RESULTS.md and results.png are written from it).

Cells of timed figures read "median [min-max]" over the repetitions; ratios are of medians.
"""
from __future__ import annotations

from cases import CASES, IMPLEMENTATIONS

RATIOS = (
    # column, numerator, denominator
    ("C / stream", "C", "stream"),
    ("numba / stream", "numba", "stream"),
    ("numba / numpy-quaternion", "numba", "numpy-quaternion"),
    ("C / numpy-quaternion", "C", "numpy-quaternion"),
    ("scipy / C", "scipy", "C"),
    ("scipy / numba", "scipy", "numba"),
    ("einsum / C", "einsum", "C"),
    ("einsum / numba", "einsum", "numba"),
)
COLOURS = {"C": "tab:blue", "numba": "tab:orange", "stream": "tab:gray",
           "numpy-quaternion": "tab:green", "scipy": "tab:red", "einsum": "tab:purple"}


def number(x: float) -> str:
    if x >= 100:
        return f"{x:,.0f}"
    return f"{x:.1f}" if x >= 10 else f"{x:.2f}"


def cell(stats) -> str:
    if stats is None:
        return "—"
    return f"{number(stats.median)} [{number(stats.low)}–{number(stats.high)}]"


def table(header, rows) -> str:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    return "\n".join(lines + ["| " + " | ".join(str(x) for x in r) + " |" for r in rows])


def goals_table(goals) -> str:
    met = sum(g.met for g in goals)
    rows = [(g.figure, g.measured, g.target, "met" if g.met else "**NOT met**", g.note)
            for g in goals]
    return (f"{met} of {len(goals)} figures met.\n\n"
            + table(("figure", "measured", "target", "status", "why (facts of this run)"), rows))


def throughput_table(results, sizes) -> str:
    names = list(IMPLEMENTATIONS)
    rows = [(c.label, f"{n:,}", *(cell(results[(c.label, n)].get(m)) for m in names))
            for c in CASES for n in sizes]
    return table(("case", "N", *names), rows)


def ratio_table(results, sizes) -> str:
    def value(row, num, den):
        return f"{row[num].median / row[den].median:.2f}" if num in row and den in row else "—"
    rows = [(c.label, f"{n:,}", *(value(results[(c.label, n)], a, b) for _, a, b in RATIOS))
            for c in CASES for n in sizes]
    return table(("case", "N", *(name for name, _, _ in RATIOS)), rows)


def notes_list(notes: dict, agreement: dict) -> str:
    lines = [f"- {c.label}: C, numba and einsum agree to {agreement[c.label]:.1e} (relative)"
             + "".join(f"; {n}" for n in notes.get(c.label, [])) for c in CASES]
    return "\n".join(lines)


def singles_table(rows) -> str:
    return table(("call", "µs per call"), [(label, cell(s)) for label, s in rows])


def generation_table(rows) -> str:
    def line(r):
        cli = f"{r['cli']:.2f}" if "cli" in r else ""
        per_term = 1e6 * r["median"] / r["terms"] if r["terms"] else float("nan")
        return (r["family"], r["n"] or r["spec"], f"{r['terms']:,}", f"{r['mul']:,}",
                f"{r['add']:,}", f"{r['median']:.3f} [{r['low']:.3f}–{r['high']:.3f}]", cli,
                f"{per_term:.1f}")
    return table(("build", "n / spec", "terms", "mul", "add", "s (in process)", "s (CLI, one run)",
                  "µs per term"), [line(r) for r in rows])


def counts_table(rows) -> str:
    def line(r):
        c = r["counts"]
        extra = "".join(f", {k} {c[k]}" for k in ("div", "calls") if k in c)
        return (r["spec"], r["kernel"], r["op"], r["signature"], f"{c['mul']}{extra}", c["add"],
                r["terms"], f"{r['dense']:,}" if r["dense"] else "—",
                r["naive"] if r["naive"] is not None else "—", r["chosen"],
                ", ".join(r["applied"] or ()) or "—")
    return table(("spec", "kernel", "op", "args -> result", "mul", "add", "terms", "dense",
                  "naive two products (mul)", "form", "applied"), [line(r) for r in rows])


def plot(path, results, sizes, gen_rows, count_rows) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, axes = plt.subplots(2, 2, figsize=(15, 11))
    for ax, n in zip(axes[0], sizes):
        bars(ax, results, n)
    generation_plot(axes[1][0], gen_rows)
    counts_plot(axes[1][1], count_rows)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def bars(ax, results, n) -> None:
    names = list(IMPLEMENTATIONS)
    height = 0.8 / len(names)
    for j, name in enumerate(names):
        ys, xs = zip(*[(i + j * height, results[(c.label, n)][name].median)
                       for i, c in enumerate(CASES) if name in results[(c.label, n)]])
        ax.barh(ys, xs, height, label=name, color=COLOURS[name])
    ax.set_yticks([i + 0.4 - height / 2 for i in range(len(CASES))])
    ax.set_yticklabels([c.label.replace(" (", "\n(") for c in CASES], fontsize=7)
    ax.invert_yaxis()
    ax.set_xscale("log")
    ax.set_xlabel("ns per element (median, log scale)")
    ax.set_title(f"Kernel throughput, float64, N = {n:,}")
    ax.legend(fontsize=7)


def generation_plot(ax, rows) -> None:
    for family in dict.fromkeys(r["family"] for r in rows):
        points = [(r["terms"], r["median"]) for r in rows if r["family"] == family]
        ax.loglog(*zip(*points), "o-" if family != "example" else "s", label=family)
    ax.axhline(20, color="red", ls=":", lw=1)
    ax.axhline(2, color="orange", ls=":", lw=1)
    ax.set_xlabel("terms emitted (manifest)")
    ax.set_ylabel("build seconds, all targets (median)")
    ax.set_title("Generation time against terms (dotted: 20 s and 2 s targets)")
    ax.legend(fontsize=7)


def counts_plot(ax, rows) -> None:
    picked = [r for r in rows if r["op"] in ("sandwich", "geometric")]
    xs = range(len(picked))
    for offset, key, name in ((-0.27, "mul", "emitted"), (0.0, "naive", "naive two products"),
                              (0.27, "dense", "dense 4^n per product")):
        values = [(r["counts"]["mul"] if key == "mul" else r[key]) or 0 for r in picked]
        ax.bar([x + offset for x in xs], values, 0.27, label=name)
    ax.set_xticks(list(xs))
    ax.set_xticklabels([f"{r['spec']}.{r['kernel']}" for r in picked], rotation=70, fontsize=6)
    ax.set_yscale("log")
    ax.set_ylabel("multiplies per element")
    ax.set_title("Multiplies of the example products and sandwiches")
    ax.legend(fontsize=7)
