"""`bladesmith diff`: what changed between two builds, at the level of formulas, not code text.

Each side of a diff is reduced to a `Side`: basis, metric, types and, per kernel, the exact
polynomial of every output component.  A side comes from a spec (derived in memory: the
`Kernel.formulas` are compared directly) or from a manifest (its canonical formula text, such as
`a.s*b.s - 2*a.e12*b.e12`, is parsed here).

Blades are matched by the set of basis vectors they span, not by name, so renaming a blade
(`blades = ["e31"]`) or reordering the basis shows up as what it does to the code: the affected
terms change sign.  Coefficients are compared as written in each side's own blade names.  A term
is identified by its factors, each an argument and a blade; a change is reported as the amount
added to the output, `compose.e01 += 2·a.e12·b.e02`, marked as a new or a dropped term, or as a
coefficient change `coefficient 1 -> -1`.  Closed forms (inverse, exp: text with calls or
divisions) are compared as text, with every factor spelled by its blade so that a rename alone
is no change; entries that are not blades (a sandwich matrix's `m0_1`) are matched by name.
Rendering (text, colour, JSON) is in `diffview.py`.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path

from . import pipeline, spec as spec_mod
from .algebra import Algebra, NameError_, permutation_sign
from .files import display_path, output_dir
from .ir import Module
from .manifest import coef_text, formula_text
from .spec import SpecError

Factors = tuple[tuple[str, str], ...]       # (argument, blade name) in the order written
TermKey = tuple[tuple[str, tuple[str, ...]], ...]


class ManifestError(SpecError):
    """A manifest that cannot be read as one: file, key and message."""


@dataclass(frozen=True)
class Blade:
    key: tuple[str, ...]        # the basis vectors it spans, sorted: identity across sides
    name: str                   # as this side names it
    order: tuple[str, ...]      # its factors in the order of the name (its orientation)


@dataclass(frozen=True)
class Output:
    blade: Blade
    terms: dict                 # TermKey -> (Fraction, Factors), in formula order
    text: str                   # canonical text, as in the manifest
    polynomial: bool = True     # False: a closed form (inverse, exp), compared as text ...
    keyed: str = ""             # ... with each factor spelled by its blade key, not its name


@dataclass(frozen=True)
class Facts:
    name: str
    op: str
    args: tuple[str, ...]
    result: str
    counts: dict
    outputs: tuple[Output, ...]

    @property
    def signature(self) -> str:
        return f"{self.op}({', '.join(self.args)}) -> {self.result}"


@dataclass(frozen=True)
class Side:
    label: str
    basis: tuple[str, ...]
    metric: dict                # (basis name, basis name) -> Fraction, each unordered pair once
    types: dict                 # type name -> {component identifier: Blade}, in order
    kernels: dict               # kernel name -> Facts


# --- building a side --------------------------------------------------------------------------

def blade(basis, name: str, factors: tuple[int, ...] | None) -> Blade:
    """`factors` None: not a blade (a matrix entry `m0_1`), identified by its name."""
    if factors is None:
        return Blade(("=" + name,), name, ())
    order = tuple(basis[i] for i in factors)
    return Blade(tuple(sorted(order)), name, order)


def metric_pairs(basis, matrix) -> dict:
    n = len(basis)
    return {(basis[i], basis[j]): Fraction(matrix[i][j]) for i in range(n) for j in range(i, n)}


def make_term(coef: Fraction, factors: Factors, blades: list) -> tuple[TermKey, tuple]:
    key = tuple(sorted((arg, b.key) for (arg, _), b in zip(factors, blades)))
    return key, (coef, factors)


def kernel_facts(name, op, args, result, counts, outputs) -> Facts:
    return Facts(name, op, tuple(args), result, dict(counts), tuple(outputs))


def from_module(module: Module, label: str) -> Side:
    """A side from a spec derived in memory: the exact `Kernel.formulas`, no text involved."""
    types = {t.name: {c.ident: blade(module.basis, c.name, c.factors if c.bitmap >= 0 else None)
                      for c in t.components} for t in module.types}
    kernels = {k.name: module_kernel(k, types) for k in module.kernels}
    return Side(label, tuple(module.basis), metric_pairs(module.basis, module.metric), types, kernels)


def module_kernel(k, types: dict) -> Facts:
    arg_type = dict(zip(k.arg_names, k.args))
    outputs = []
    for fm in k.formulas:
        terms = {}
        for t in fm.terms:
            blades = [types[arg_type[f.arg]][f.comp] for f in t.factors]
            factors = tuple((f.arg, b.name) for f, b in zip(t.factors, blades))
            key, value = make_term(t.coef, factors, blades)
            terms[key] = value
        text = formula_text(fm)
        outputs.append(Output(types[k.result][fm.comp], terms, text, fm.text is None,
                              keyed_text(text, arg_type, types)))
    return kernel_facts(k.name, k.op, k.args, k.result, k.program.counts.as_dict(), outputs)


# --- reading a manifest -------------------------------------------------------------------------

_FACTOR = re.compile(r"([ab])\.([A-Za-z0-9_]+)\Z")
_COEF = re.compile(r"\d+(/\d+)?\Z")


class ManifestReader:
    """Reads one manifest document into a `Side`; every problem is a located ManifestError."""

    def __init__(self, doc, file: str):
        self.doc, self.file = doc, file

    def fail(self, key: str, message: str):
        raise ManifestError(self.file, key, message)

    def get(self, table, name: str, kind, key: str):
        value = table.get(name) if isinstance(table, dict) else None
        if not isinstance(value, kind):
            self.fail(f"{key}.{name}".lstrip("."), f"missing or not a {kind.__name__}")
        return value

    def side(self, label: str) -> Side:
        alg = self.get(self.doc, "algebra", dict, "")
        basis = tuple(self.strings(self.get(alg, "basis", list, "algebra"), "algebra.basis"))
        algebra = Algebra("manifest", basis, [[0] * len(basis)] * len(basis))
        for i, name in enumerate(self.strings(alg.get("blades", []), "algebra.blades")):
            self.guard(f"algebra.blades[{i}]", algebra.add_preferred, name)
        types = {name: self.type_blades(algebra, name, comps)
                 for name, comps in self.get(self.doc, "types", dict, "").items()}
        kernels = {}
        for i, entry in enumerate(self.get(self.doc, "kernels", list, "")):
            facts = self.kernel(entry, f"kernels[{i}]", types)
            kernels[facts.name] = facts
        metric = metric_pairs(basis, self.metric(alg.get("metric"), len(basis)))
        return Side(label, basis, metric, types, kernels)

    def guard(self, key: str, fn, *args):
        try:
            return fn(*args)
        except (NameError_, ValueError, ZeroDivisionError, TypeError) as exc:
            self.fail(key, str(exc))

    def strings(self, value, key: str) -> list:
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.fail(key, "expected a list of strings")
        return value

    def metric(self, value, n: int):
        if isinstance(value, list) and len(value) == n and all(isinstance(v, str) for v in value):
            value = [[value[i] if i == j else "0" for j in range(n)] for i in range(n)]
        ok = isinstance(value, list) and len(value) == n and all(
            isinstance(row, list) and len(row) == n and all(isinstance(x, str) for x in row)
            for row in value)
        if not ok:
            self.fail("algebra.metric", f"expected {n} rational strings or a {n}x{n} matrix of them")
        return [[self.guard("algebra.metric", Fraction, x) for x in row] for row in value]

    def type_blades(self, algebra: Algebra, name: str, comps) -> dict:
        key = f"types.{name}"
        out = {}
        for comp in self.strings(comps, key):
            try:
                factors = algebra.parse(comp)
            except NameError_:
                factors = None          # not a blade: a matrix entry such as m0_1
            out[comp.replace("^", "_")] = blade(algebra.basis, comp, factors)
        return out

    def kernel(self, entry, key: str, types: dict) -> Facts:
        name, op, result = (self.get(entry, k, str, key) for k in ("name", "op", "result"))
        args = self.strings(self.get(entry, "args", list, key), f"{key}.args")
        for i, t in enumerate(args + [result]):
            if t not in types:
                self.fail(f"{key}.args[{i}]" if i < len(args) else f"{key}.result",
                          f"type {t!r} is not in the manifest's types")
        arg_type = dict(zip("ab", args))
        outputs = []
        for comp, text in self.get(entry, "formulas", dict, key).items():
            where = f"{key}.formulas.{comp}"
            if comp not in types[result] or not isinstance(text, str):
                self.fail(where, f"not a component of {result!r} with formula text")
            outputs.append(self.output(types[result][comp], text, arg_type, types, where))
        counts = entry.get("counts") if isinstance(entry.get("counts"), dict) else {}
        return kernel_facts(name, op, args, result, counts, outputs)

    def output(self, comp: Blade, text: str, arg_type: dict, types: dict, where: str) -> Output:
        if closed_form(text):
            return Output(comp, {}, text, False, keyed_text(text, arg_type, types))
        terms = [self.term(coef, factors, arg_type, types, where)
                 for coef, factors in parse_formula(text, lambda m: self.fail(where, m))]
        return Output(comp, dict(terms), text)

    def term(self, coef, factors, arg_type: dict, types: dict, where: str):
        blades = []
        for arg, ident in factors:
            comps = types.get(arg_type.get(arg), {})
            if ident not in comps:
                self.fail(where, f"{arg}.{ident} is not a component of the kernel's arguments")
            blades.append(comps[ident])
        named = tuple((arg, b.name) for (arg, _), b in zip(factors, blades))
        return make_term(coef, named, blades)


def keyed_text(text: str, arg_type: dict, types: dict) -> str:
    """Closed-form text with `a.e31` spelled `a.{e1,e3}`: renaming alone changes nothing."""
    def key(m: re.Match) -> str:
        b = types.get(arg_type.get(m.group(1)), {}).get(m.group(2))
        return m.group(0) if b is None else m.group(1) + ".{" + ",".join(b.key) + "}"
    return re.sub(r"\b([ab])\.(\w+)", key, text)


def closed_form(text: str) -> bool:
    """Formula text that is not a polynomial: a call, parentheses or a division by a variable."""
    return bool(re.search(r"[()]|/(?!\d)", text))


def parse_formula(text: str, fail) -> list[tuple[Fraction, tuple[tuple[str, str], ...]]]:
    """Parse canonical formula text (`manifest.formula_text`): `-a.s*b.e1 + 1/2*a.e1*b.s`."""
    if text == "0":
        return []
    pieces = re.split(r" ([+-]) ", text)
    first = pieces[0]
    signs = ["-" if first.startswith("-") else "+"] + pieces[1::2]
    bodies = [first[1:] if first.startswith("-") else first] + pieces[2::2]
    return [parse_term(sign, body, fail) for sign, body in zip(signs, bodies)]


def parse_term(sign: str, body: str, fail):
    parts = body.split("*")
    coef = Fraction(1)
    if parts and _COEF.match(parts[0]):
        coef = Fraction(parts.pop(0))
    factors = []
    for p in parts:
        m = _FACTOR.match(p)
        if not m:
            fail(f"cannot read the term {body!r}: expected factors like a.e12 joined by '*'")
        factors.append((m.group(1), m.group(2)))
    if not coef or (not factors and not _COEF.match(body)):
        fail(f"cannot read the term {body!r}")
    return (-coef if sign == "-" else coef), tuple(factors)


def load_manifest(path: Path, label: str | None = None) -> Side:
    import json
    display = display_path(path)
    try:
        doc = json.loads(path.read_bytes().decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise ManifestError(display, "", f"not a JSON manifest: {exc}") from None
    return ManifestReader(doc, display).side(label or display)


def load_spec(path: Path) -> Side:
    spec = spec_mod.load(path)
    return from_module(pipeline.derive_module(spec), spec.display)


def load_side(path: Path) -> Side:
    """A spec, or a manifest (a file ending in .json)."""
    return load_manifest(path) if path.name.endswith(".json") else load_spec(path)


def against_output(path: Path, cli_out: str | None) -> tuple[Side, Side]:
    """(the manifest in the spec's output directory, the spec now): what a build would change."""
    spec = spec_mod.load(path)
    manifest = output_dir(spec, cli_out) / f"{spec.name}.manifest.json"
    new = from_module(pipeline.derive_module(spec), spec.display)
    if not manifest.is_file():
        return Side(f"(nothing built at {manifest})", (), {}, {}, {}), new
    return load_manifest(manifest), new


# --- comparing two sides ------------------------------------------------------------------------

@dataclass(frozen=True)
class Note:
    """An algebra-level change: basis, a metric entry, a blade's name, a type's components."""

    what: str
    subject: str
    old: str | None
    new: str | None


@dataclass(frozen=True)
class TermChange:
    change: str                 # "added", "removed", "coefficient"
    factors: Factors            # in the new side's names (the old side's for a removed term)
    old: Fraction | None
    new: Fraction | None


@dataclass(frozen=True)
class ComponentChange:
    name: str
    status: str                 # "added", "removed", "changed"
    terms: tuple[TermChange, ...]
    old_text: str | None = None     # set when a closed form (not a polynomial) changed
    new_text: str | None = None


@dataclass(frozen=True)
class KernelChange:
    name: str
    status: str                 # "added", "removed", "changed"
    old: Facts | None
    new: Facts | None
    components: tuple[ComponentChange, ...] = ()

    @property
    def counts_changed(self) -> bool:
        return self.status == "changed" and self.old.counts != self.new.counts


@dataclass(frozen=True)
class Diff:
    old: str
    new: str
    notes: tuple[Note, ...]
    kernels: tuple[KernelChange, ...]

    @property
    def changed(self) -> bool:
        return bool(self.notes or self.kernels)


def compare(old: Side, new: Side) -> Diff:
    notes = algebra_notes(old, new) if old.basis and new.basis else []
    changes = [kernel_change(old.kernels.get(name), new.kernels.get(name), name)
               for name in list(new.kernels) + [n for n in old.kernels if n not in new.kernels]]
    return Diff(old.label, new.label, tuple(notes), tuple(c for c in changes if c is not None))


def listing(names) -> str:
    return "[" + ", ".join(names) + "]"


def algebra_notes(old: Side, new: Side) -> list[Note]:
    notes = []
    if old.basis != new.basis:
        notes.append(Note("basis", "", listing(old.basis), listing(new.basis)))
    for pair in [p for p in new.metric if p in old.metric]:
        if old.metric[pair] != new.metric[pair]:
            notes.append(Note("metric", "·".join(pair), coef_text(old.metric[pair]),
                              coef_text(new.metric[pair])))
    notes += blade_notes(old, new) + type_notes(old, new)
    return notes


def all_blades(side: Side) -> dict:
    return {b.key: b for comps in side.types.values() for b in comps.values()}


def blade_notes(old: Side, new: Side) -> list[Note]:
    before, notes = all_blades(old), []
    for key, b in all_blades(new).items():
        a = before.get(key)
        if a is not None and a.name != b.name:
            flip = orientation(a.order, b.order) < 0
            notes.append(Note("blade", a.name, a.name, f"{b.name} (" + (
                f"orientation flipped: {b.name} = -{a.name})" if flip else "same orientation)")))
    return notes


def orientation(a: tuple[str, ...], b: tuple[str, ...]) -> int:
    """+1 when the factor orders a and b are an even permutation of each other, else -1."""
    rank = {name: i for i, name in enumerate(a)}
    return permutation_sign(tuple(rank[name] for name in b))


def type_notes(old: Side, new: Side) -> list[Note]:
    notes = []
    for name in list(new.types) + [n for n in old.types if n not in new.types]:
        a, b = (listing(b_.name for b_ in s.types[name].values()) if name in s.types else None
                for s in (old, new))
        if a != b:
            notes.append(Note("type", name, a, b))
    return notes


def kernel_change(old: Facts | None, new: Facts | None, name: str) -> KernelChange | None:
    if old is None:
        return KernelChange(name, "added", None, new)
    if new is None:
        return KernelChange(name, "removed", old, None)
    comps = component_changes(old, new)
    same = (old.op, old.args, old.result, old.counts) == (new.op, new.args, new.result, new.counts)
    return None if same and not comps else KernelChange(name, "changed", old, new, comps)


def component_changes(old: Facts, new: Facts) -> tuple[ComponentChange, ...]:
    before = {o.blade.key: o for o in old.outputs}
    after = {o.blade.key: o for o in new.outputs}
    out = [output_change(before.get(o.blade.key), o) for o in new.outputs]
    out += [output_change(o, None) for o in old.outputs if o.blade.key not in after]
    return tuple(c for c in out if c is not None)


def output_change(old: Output | None, new: Output | None) -> ComponentChange | None:
    name = (new or old).blade.name
    status = "changed" if old and new else ("added" if new else "removed")
    if all(o is None or o.polynomial for o in (old, new)):
        terms = term_changes(old.terms if old else {}, new.terms if new else {})
        return ComponentChange(name, status, terms) if terms else None
    if old and new and old.keyed == new.keyed and not (old.polynomial or new.polynomial):
        return None
    return ComponentChange(name, status, (), *(o.text if o else None for o in (old, new)))


def term_changes(old: dict, new: dict) -> tuple[TermChange, ...]:
    out = []
    for key, (coef, factors) in new.items():
        if key not in old:
            out.append(TermChange("added", factors, None, coef))
        elif old[key][0] != coef:
            out.append(TermChange("coefficient", factors, old[key][0], coef))
    out += [TermChange("removed", f, c, None) for key, (c, f) in old.items() if key not in new]
    return tuple(out)


def sides(paths, cli_out: str | None) -> tuple[Side, Side]:
    """`diff SPEC` (against its output directory) or `diff OLD NEW` (specs or manifests)."""
    if len(paths) == 1:
        return against_output(Path(paths[0]), cli_out)
    return load_side(Path(paths[0])), load_side(Path(paths[1]))
