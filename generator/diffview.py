"""Print a formula-level `diff.Diff`: readable text (coloured on a terminal) or JSON for tools.

A term change is printed as the amount added to the output component, so each line is exact
mathematics: `compose.e01 += 2·a.e12·b.e02  (new term)`, `compose.s -= a.e12·b.e12  (dropped
term)` for a dropped +a.e12·b.e12, `compose.e12: a.e31·b.e23 coefficient -1 -> 1`.  Colour is
used only when the output is a terminal and NO_COLOR is unset (https://no-color.org); the middle
dot falls back to `*` on streams that cannot encode it; JSON uses `*` and plain ASCII.
"""
from __future__ import annotations

import json
import os
from fractions import Fraction

import click

from .diff import ComponentChange, Diff, Facts, KernelChange, TermChange
from .manifest import coef_text

DOT = "·"
STYLES = {"added": {"fg": "green"}, "removed": {"fg": "red"}, "coefficient": {"fg": "yellow"},
          "changed": {"bold": True}, "note": {"fg": "cyan"}}
MARKS = {"added": "+ ", "removed": "- ", "changed": ""}
TAGS = {"added": "  (new term)", "removed": "  (dropped term)"}


def use_colour(stream, env=None) -> bool:
    env = os.environ if env is None else env
    return bool(getattr(stream, "isatty", lambda: False)()) and not env.get("NO_COLOR")


def dot_for(stream) -> str:
    """The middle dot if the stream can encode it, else '*'."""
    try:
        DOT.encode(getattr(stream, "encoding", None) or "ascii")
        return DOT
    except (LookupError, UnicodeEncodeError):
        return "*"


def product(coef: Fraction, factors, dot: str = DOT) -> str:
    """|coef|·a.e12·b.e02 with the magnitude omitted when it is 1 (and there are factors)."""
    names = [f"{arg}.{name}" for arg, name in factors]
    mag = abs(coef)
    return dot.join(([coef_text(mag)] if mag != 1 or not names else []) + names)


def term_line(kernel: str, comp: str, t: TermChange) -> str:
    where = f"{kernel}.{comp}"
    if t.change == "coefficient":
        return (f"{where}: {product(Fraction(1), t.factors)} coefficient "
                f"{coef_text(t.old)} -> {coef_text(t.new)}")
    delta = t.new if t.change == "added" else -t.old
    op = "+=" if delta > 0 else "-="
    return f"{where} {op} {product(delta, t.factors)}{TAGS[t.change]}"


def signature_lines(k: KernelChange) -> list[str]:
    rows = [("op", k.old.op, k.new.op), ("args", ", ".join(k.old.args), ", ".join(k.new.args)),
            ("result", k.old.result, k.new.result)]
    lines = [f"  {what}: {a} -> {b}" for what, a, b in rows if a != b]
    if k.counts_changed:
        lines.append(f"  cost: {cost(k.old.counts)} -> {cost(k.new.counts)}")
    return lines


def cost(counts: dict) -> str:
    return ", ".join(f"{counts[k]} {k}" for k in ("mul", "add", "div", "calls") if k in counts)


def kernel_block(k: KernelChange) -> list[tuple[str, str]]:
    """(style, line) pairs for one kernel."""
    facts: Facts = k.new or k.old
    head = f"{MARKS[k.status]}kernel {k.name}: {facts.signature}"
    if k.status != "changed":
        return [(k.status, f"{head} ({len(facts.outputs)} components)")]
    out = [("changed", head)] + [("changed", line) for line in signature_lines(k)]
    for c in k.components:
        out += component_block(k.name, c)
    return out


def component_block(kernel: str, c: ComponentChange) -> list[tuple[str, str]]:
    out = []
    if c.status != "changed":
        word = "new component" if c.status == "added" else "component removed"
        out.append((c.status, f"  {kernel}.{c.name}: {word}"))
    elif c.old_text or c.new_text:
        out.append(("coefficient", f"  {kernel}.{c.name}: closed form changed"))
    for style, label, text in (("removed", "was", c.old_text), ("added", "now", c.new_text)):
        if text is not None:
            out.append((style, f"    {label}: {text}"))
    return out + [(t.change, f"  {term_line(kernel, c.name, t)}") for t in c.terms]


def text_lines(d: Diff) -> list[tuple[str, str]]:
    lines = [("changed", f"formula changes from {d.old} to {d.new}")]
    for n in d.notes:
        subject = f"{n.what} {n.subject}".strip()
        lines.append(("note", f"{subject}: {n.old or '(none)'} -> {n.new or '(none)'}"))
    for k in d.kernels:
        lines += kernel_block(k)
    return lines


def render_text(d: Diff, colour: bool = False, dot: str = DOT) -> str:
    if not d.changed:
        return ""
    out = []
    for style, line in text_lines(d):
        line = line.replace(DOT, dot)
        out.append(click.style(line, **STYLES[style]) if colour else line)
    return "\n".join(out)


# --- JSON -------------------------------------------------------------------------------------

def facts_json(f: Facts | None):
    if f is None:
        return None
    return {"op": f.op, "args": list(f.args), "result": f.result, "counts": f.counts}


def term_json(t: TermChange) -> dict:
    return {"term": product(Fraction(1), t.factors, "*"), "change": t.change,
            "old": None if t.old is None else coef_text(t.old),
            "new": None if t.new is None else coef_text(t.new)}


def kernel_json(k: KernelChange) -> dict:
    return {"name": k.name, "status": k.status, "old": facts_json(k.old), "new": facts_json(k.new),
            "components": [component_json(c) for c in k.components]}


def component_json(c: ComponentChange) -> dict:
    out = {"component": c.name, "status": c.status, "terms": [term_json(t) for t in c.terms]}
    if c.old_text or c.new_text:
        out.update(old_formula=c.old_text, new_formula=c.new_text)
    return out


def render_json(d: Diff) -> str:
    doc = {"old": d.old, "new": d.new, "changed": d.changed,
           "notes": [{"what": n.what, "subject": n.subject.replace(DOT, "*"), "old": n.old,
                      "new": n.new} for n in d.notes],
           "kernels": [kernel_json(k) for k in d.kernels]}
    return json.dumps(doc, indent=2, ensure_ascii=True)
