"""`bladesmith show` and `bladesmith table`: formulas and multiplication tables for people to read.

`show` derives a spec in memory and prints each kernel's exact formulas with its operation counts
(from the optimized program, the numbers the manifest records) as plain text (the manifest's
canonical formula text), LaTeX (an `align*` block per kernel) or Markdown (a table per kernel).

`table` prints the product of every pair of basis blades for one bilinear operation: blades in
canonical order and named as the algebra names them (`Algebra.component`), products from
`Algebra.product` filtered by the operation's grade rule (`ops.CATALOGUE`); the commutator is
(ab - ba)/2.  Cell (row A, column B) is A op B.  `table_png` draws the same grid with matplotlib
(an optional extra) at a fixed size: (N + 1) cells of CELL_PX pixels square for N blades.
"""
from __future__ import annotations

import io
import re
from fractions import Fraction
from pathlib import Path

import click

from . import model as model_mod, pipeline, spec as spec_mod
from .algebra import Algebra, canonical_key, popcount
from .files import write_one
from .ir import Kernel, Module
from .manifest import coef_text, formula_text
from .ops import CATALOGUE

MAX_TABLE_DIMENSION = 6
CELL_PX, DPI = 48, 100


class ShowError(click.ClickException):
    """A request `show` or `table` cannot satisfy: `Error: ...` and exit 2 in the CLI."""

    exit_code = 2


# --- show ---------------------------------------------------------------------------------------

def select(module: Module, kernel: str | None) -> list[Kernel]:
    if kernel is None:
        return list(module.kernels)
    for k in module.kernels:
        if k.name == kernel:
            return [k]
    names = ", ".join(k.name for k in module.kernels)
    raise ShowError(f"{module.spec_path}: no kernel named {kernel!r}; kernels: {names}")


def heading(k: Kernel) -> str:
    return f"{k.name}: {k.op}({', '.join(k.args)}) -> {k.result}"


def cost_line(k: Kernel) -> str:
    p = k.program
    counts = ", ".join(f"{v} {name}" for name, v in p.counts.as_dict().items())
    forms = "; ".join(f"{name} {c.mul} mul {c.add} add" for name, c in p.forms)
    return f"cost: {counts} (chosen form: {p.form}; compared: {forms})"


def show_text(module: Module, kernels: list[Kernel]) -> str:
    blocks = []
    for k in kernels:
        width = max((len(fm.comp) for fm in k.formulas), default=0)
        lines = [heading(k), f"  definition: {CATALOGUE[k.op].formula}", f"  {cost_line(k)}"]
        lines += [f"  {fm.comp.ljust(width)} = {formula_text(fm)}" for fm in k.formulas]
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks)


def show_markdown(module: Module, kernels: list[Kernel]) -> str:
    blocks = []
    for k in kernels:
        lines = [f"### `{k.name}`: {k.op}({', '.join(k.args)}) -> {k.result}", "",
                 f"definition: `{CATALOGUE[k.op].formula}`; {cost_line(k)}", "",
                 "| component | formula |", "|---|---|"]
        lines += [f"| `{fm.comp}` | `{formula_text(fm)}` |" for fm in k.formulas]
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks)


def latex_name(ident: str, short: bool) -> str:
    if short and re.fullmatch(r"e\w+", ident):
        return f"e_{{{ident[1:]}}}"
    return r"\mathrm{" + ident.replace("_", r"\_") + "}"


def latex_text(text: str, short: bool) -> str:
    """A closed form's canonical text in LaTeX: factors as subscripts, helpers as operators."""
    text = re.sub(r"\b([ab])\.(\w+)", lambda m: f"{m[1]}_{{{latex_name(m[2], short)}}}", text)
    text = re.sub(r"\b([A-Za-z]\w*)\(", lambda m: r"\operatorname{" + m[1].replace("_", r"\_") + "}(",
                  text)
    return text.replace("*", r" \, ")


def latex_formula(fm, short: bool) -> str:
    if fm.text is not None:
        return latex_text(fm.text, short)
    if not fm.terms:
        return "0"
    out = []
    for i, t in enumerate(fm.terms):
        mag = abs(t.coef)
        coef = "" if mag == 1 and t.factors else latex_coef(mag)
        body = coef + " ".join(f"{f.arg}_{{{latex_name(f.comp, short)}}}" for f in t.factors)
        sign = "-" if t.coef < 0 else ("+" if i else "")
        out.append(f"{sign} {body}".strip() if i else f"{sign}{body}")
    return " ".join(out)


def latex_coef(c: Fraction) -> str:
    return str(c.numerator) if c.denominator == 1 else rf"\tfrac{{{c.numerator}}}{{{c.denominator}}}"


def show_latex(module: Module, kernels: list[Kernel]) -> str:
    short = all(len(b) == 2 and b[0] == "e" for b in module.basis)
    blocks = []
    for k in kernels:
        name = k.name.replace("_", r"\_")
        rows = [rf"\mathrm{{{name}}}_{{{latex_name(fm.comp, short)}}} &= {latex_formula(fm, short)}"
                for fm in k.formulas]
        blocks.append(f"% {heading(k)}; {cost_line(k)}\n\\begin{{align*}}\n"
                      + " \\\\\n".join(rows) + "\n\\end{align*}")
    return "\n\n".join(blocks)


STYLES = {"text": show_text, "markdown": show_markdown, "latex": show_latex}


def show(path, kernel: str | None = None, style: str = "text") -> str:
    module = pipeline.derive_module(spec_mod.load(path))
    return STYLES[style](module, select(module, kernel))


# --- table --------------------------------------------------------------------------------------

def table_ops() -> list[str]:
    return [name for name, op in CATALOGUE.items() if op.kind in ("bilinear", "commutator")]


def blade_product(alg: Algebra, op, a: int, b: int) -> dict[int, Fraction]:
    """A op B for canonical blades a, b, as {canonical bitmap: coefficient}."""
    if op.kind == "commutator":
        out: dict[int, Fraction] = {}
        for (x, y), scale in (((a, b), Fraction(1, 2)), ((b, a), Fraction(-1, 2))):
            for c, coef in alg.product(x, y):
                out[c] = out.get(c, 0) + coef * scale
        return out
    r, s = popcount(a), popcount(b)
    return {c: coef for c, coef in alg.product(a, b) if op.keep(r, s, popcount(c))}


def cell(alg: Algebra, op, a: int, b: int) -> str:
    """The product of the *named* blades a and b, in named blades: '0', '-e12', '2*e3 + 1'."""
    ca, cb = alg.component(a), alg.component(b)
    terms = []
    for c, coef in sorted(blade_product(alg, op, a, b).items(), key=lambda x: canonical_key(x[0])):
        comp = alg.component(c)
        value = coef * ca.sign * cb.sign * comp.sign
        if value:
            terms.append((value, comp.name))
    return join_terms(terms)


def join_terms(terms) -> str:
    out = ""
    for value, name in terms:
        body = coef_text(abs(value)) if name == "s" else (
            name if abs(value) == 1 else f"{coef_text(abs(value))}*{name}")
        sign = "-" if value < 0 else "+"
        out += (("-" if sign == "-" else "") + body) if not out else f" {sign} {body}"
    return out or "0"


def grid(path, op_name: str = "geometric") -> tuple[spec_mod.Spec, list[str], list[list[str]]]:
    """(spec, blade names, rows of cells) of the table of one operation."""
    if op_name not in table_ops():
        raise ShowError(f"{op_name!r} is not a product of two blades; choose one of "
                        f"{', '.join(table_ops())}")
    spec = spec_mod.load(path)
    alg = model_mod.build(spec).algebra
    if alg.n > MAX_TABLE_DIMENSION:
        raise ShowError(f"{spec.display}: the algebra has {alg.n} basis vectors, so the table would "
                        f"be {2 ** alg.n} x {2 ** alg.n}; tables are limited to n <= "
                        f"{MAX_TABLE_DIMENSION} ({2 ** MAX_TABLE_DIMENSION} blades)")
    blades = [b for g in range(alg.n + 1) for b in alg.grade_bitmaps(g)]
    op = CATALOGUE[op_name]
    names = [alg.component(b).name for b in blades]
    return spec, names, [[cell(alg, op, a, b) for b in blades] for a in blades]


def table_text(path, op_name: str = "geometric") -> str:
    spec, names, rows = grid(path, op_name)
    header = [f"{op_name}"] + names
    body = [[n] + row for n, row in zip(names, rows)]
    widths = [max(len(r[i]) for r in [header] + body) for i in range(len(header))]
    lines = ["  ".join(x.rjust(w) for x, w in zip(r, widths)).rstrip() for r in [header] + body]
    lines.insert(1, "  ".join("-" * w for w in widths))
    title = f"{spec.name}: {op_name} product of basis blades, row op column (s = the scalar 1)"
    return "\n".join([title] + lines)


def png_size(blade_count: int) -> int:
    """Width and height in pixels of the image of a table of `blade_count` blades."""
    return (blade_count + 1) * CELL_PX


def table_png(path, out_file, op_name: str = "geometric") -> int:
    """Draw the table into a PNG file (written atomically); returns its size in pixels (square)."""
    figure_class = matplotlib_figure()
    spec, names, rows = grid(path, op_name)
    size = png_size(len(names))
    data = draw(figure_class, [[op_name] + names] + [[n] + row for n, row in zip(names, rows)], size)
    out_file = Path(out_file)
    out_file.parent.mkdir(parents=True, exist_ok=True)
    write_one(out_file, data)
    return size


def matplotlib_figure():
    try:
        import matplotlib
        matplotlib.use("Agg")
        from matplotlib.figure import Figure
    except ImportError:
        raise ShowError("--png needs matplotlib, an optional extra: "
                        "pip install 'bladesmith[plot]' (or pip install matplotlib)") from None
    return Figure


def draw(figure_class, cells: list[list[str]], size: int) -> bytes:
    """PNG bytes of a grid of cells, header row and column shaded, `size` pixels square."""
    fig = figure_class(figsize=(size / DPI, size / DPI), dpi=DPI)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_axis_off()
    tab = ax.table(cellText=cells, loc="center", cellLoc="center", bbox=(0, 0, 1, 1))
    tab.auto_set_font_size(False)
    font = max(4, min(10, 400 // len(cells)))
    tab.set_fontsize(font)
    for (r, c), item in tab.get_celld().items():
        if r == 0 or c == 0:
            item.set_facecolor("#dde6f0")
    corner = tab[0, 0].get_text()
    corner.set_fontsize(font * min(1.0, 6 / max(len(corner.get_text()), 1)))
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI, metadata={"Software": None})
    return buffer.getvalue()
