"""Load and validate a spec file (DESIGN section 4) into a plain `Spec`.

This stage checks the shape of the document: known keys only (with a suggestion for a typo),
the right value types, exact rational metric entries, identifiers that are safe in C and Python.
What needs the algebra (blade names, type contents, result types) is checked by `model.py`.
Every problem raises `SpecError`, which carries the file, the key path and the line.
"""
from __future__ import annotations

import difflib
import hashlib
import re
import tomllib
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path

from .names import identifier_problem, module_problem, printable, shown
from .tomllines import LineIndex, key_part

TARGETS = ("python", "numba", "c")
OPTION_KEYS = ("origin", "infinity")        # op-specific kernel keys (the conformal `up`)
KERNEL_KEYS = ("op", "args", "name", "result", "grades") + OPTION_KEYS
TARGET_KEYS = {"python": (), "numba": (), "c": ("real",)}
C_REALS = ("double", "float")
MAX_DIMENSION = 16
TOP_KEYS = ("algebra", "types", "kernels", "targets", "output")

_RATIONAL = re.compile(r"\s*[-+]?\d+(\s*/\s*\d+)?\s*\Z")


class SpecError(Exception):
    """A mistake in a spec: file, key path, line (when known) and a message that says the fix."""

    def __init__(self, file: str, key: str, message: str, line: int | None = None):
        super().__init__(message)
        self.file, self.key, self.message, self.line = file, key, message, line

    def __str__(self) -> str:
        where = f"{self.file}:{self.line}" if self.line else f"{self.file}"
        text = f"{where}: {self.key}: {self.message}" if self.key else f"{where}: {self.message}"
        return printable(text)


@dataclass(frozen=True)
class TypeSpec:
    name: str
    grades: tuple[int, ...] | None
    blades: tuple[str, ...] | None
    key: str                                # "types.motor"


@dataclass(frozen=True)
class KernelSpec:
    op: str
    args: tuple[str, ...]
    name: str
    result: str | None
    grades: tuple[int, ...] | None
    key: str                                # "kernels[2]"
    options: tuple[tuple[str, str], ...] = ()   # op-specific keys, e.g. (("origin", "eo"), ...)

    def option(self, name: str) -> str | None:
        return dict(self.options).get(name)


@dataclass(frozen=True)
class Spec:
    path: Path
    display: str                            # the path as given, for messages and banners
    text: str
    digest: str                             # sha256 of the file's bytes
    name: str
    basis: tuple[str, ...]
    metric: tuple[tuple[Fraction, ...], ...]   # always the full symmetric matrix
    diagonal: bool
    blade_names: tuple[str, ...]
    types: tuple[TypeSpec, ...]
    kernels: tuple[KernelSpec, ...]
    targets: dict                           # target -> options dict
    output_dir: str | None
    lines: LineIndex

    def error(self, key: str, message: str) -> SpecError:
        return SpecError(self.display, key, message, self.lines.line_of(key))


class _Reader:
    """Validates one parsed document; `fail` raises a located SpecError."""

    def __init__(self, display: str, text: str):
        self.display, self.lines = display, LineIndex(text)

    def fail(self, key: str, message: str):
        raise SpecError(self.display, key, message, self.lines.line_of(key))

    def table(self, value, key: str, allowed: tuple[str, ...], required: tuple[str, ...] = ()):
        if not isinstance(value, dict):
            self.fail(key, f"expected a table, got {_kind(value)}")
        for name in sorted(value):
            if name not in allowed:
                self.fail(_join(key, name), f"unknown key {shown(name)}{_suggest(name, allowed, key)}")
        for name in required:
            if name not in value:
                self.fail(key, f"missing required key {name!r}")
        return value

    def string(self, value, key: str) -> str:
        if not isinstance(value, str):
            self.fail(key, f"expected a string, got {_kind(value)}")
        return value

    def ident(self, value, key: str) -> str:
        problem = identifier_problem(self.string(value, key))
        if problem:
            self.fail(key, problem)
        return value

    def strings(self, value, key: str, idents: bool = False) -> tuple[str, ...]:
        if not isinstance(value, list):
            self.fail(key, f"expected a list of strings, got {_kind(value)}")
        check = self.ident if idents else self.string
        return tuple(check(v, f"{key}[{i}]") for i, v in enumerate(value))

    def ints(self, value, key: str) -> tuple[int, ...]:
        if not isinstance(value, list):
            self.fail(key, f"expected a list of integers, got {_kind(value)}")
        for i, v in enumerate(value):
            if not isinstance(v, int) or isinstance(v, bool):
                self.fail(f"{key}[{i}]", f"expected an integer, got {_kind(v)}")
        return tuple(value)

    def rational(self, value, key: str) -> Fraction:
        if isinstance(value, bool):
            self.fail(key, "expected an integer or a rational string like \"1/2\", got a boolean")
        if isinstance(value, int):
            return Fraction(value)
        if isinstance(value, float):
            self.fail(key, f"floats are refused because derivation is exact: write {value!r} "
                           "as an integer or a rational string like \"1/2\"")
        if isinstance(value, str) and _RATIONAL.match(value):
            if re.search(r"/\s*0+\s*\Z", value):
                self.fail(key, f"{shown(value)} divides by zero")
            try:
                return Fraction(value.replace(" ", ""))
            except ValueError as exc:          # e.g. more digits than Python converts
                self.fail(key, f"{shown(value)} is not a usable number: {_digits(exc)}")
        self.fail(key, f"expected an integer or a rational string like \"1/2\", got {shown(value)}")


def _kind(value) -> str:
    names = {bool: "a boolean", int: "an integer", float: "a float", str: "a string",
             list: "a list", dict: "a table"}
    return names.get(type(value), type(value).__name__)


def _join(key: str, name: str) -> str:
    return f"{key}.{key_part(name)}" if key else key_part(name)


def _suggest(name: str, allowed, key: str = "") -> str:
    close = difflib.get_close_matches(name, list(allowed), n=1, cutoff=0.6)
    if close:
        return f" (did you mean {close[0]!r}?)"
    if key and name in TOP_KEYS:
        return (f"; {name!r} is a top-level key, but here it belongs to [{key}]: move it above "
                "the first table header")
    if not allowed:
        return "; this table takes no keys"
    return f"; expected one of: {', '.join(allowed)}"


def load(path: str | Path, display: str | None = None) -> Spec:
    """Read and validate a spec file."""
    path = Path(path)
    display = display or str(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise SpecError(display, "", f"cannot read the spec: {exc.strerror or exc}") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise SpecError(display, "", "the spec is not valid UTF-8 text") from None
    return parse(text, path, display, hashlib.sha256(data).hexdigest())


def parse(text: str, path: Path, display: str, digest: str) -> Spec:
    doc = _toml(text, display)
    r = _Reader(display, text)
    r.table(doc, "", TOP_KEYS, ("algebra",))
    alg = r.table(doc["algebra"], "algebra", ("name", "basis", "metric", "blades"),
                  ("name", "basis", "metric"))
    name = r.ident(alg["name"], "algebra.name")
    if module_problem(name):
        r.fail("algebra.name", module_problem(name))
    basis = _basis(r, alg["basis"])
    metric, diagonal = _metric(r, alg["metric"], len(basis))
    blade_names = r.strings(alg.get("blades", []), "algebra.blades")
    return Spec(path=path, display=display, text=text, digest=digest, name=name, basis=basis,
                metric=metric, diagonal=diagonal, blade_names=blade_names,
                types=_types(r, doc.get("types", {})), kernels=_kernels(r, doc.get("kernels", [])),
                targets=_targets(r, doc.get("targets")), output_dir=_output(r, doc.get("output")),
                lines=r.lines)


def _digits(exc: ValueError) -> str:
    """Python's complaint about an over-long number, without its advice to call sys functions."""
    return str(exc).split("; use sys.")[0]


def _toml(text: str, display: str) -> dict:
    """tomllib's document, or a SpecError at the line of the syntax error."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        where = re.search(r" \(at line (\d+), column (\d+)\)", str(exc))
        message = str(exc).replace(where.group(0), f" (column {where.group(2)})") if where else str(exc)
        line = int(where.group(1)) if where else text.count("\n") + 1
        raise SpecError(display, "", f"TOML syntax error: {message}", line) from None
    except (RecursionError, ValueError) as exc:   # absurd nesting, or an integer too long
        why = "it is nested too deeply" if isinstance(exc, RecursionError) else _digits(exc)
        raise SpecError(display, "", f"the TOML document cannot be read: {why}") from None


def _basis(r: _Reader, value) -> tuple[str, ...]:
    basis = r.strings(value, "algebra.basis", idents=True)
    if not basis:
        r.fail("algebra.basis", "the basis is empty; list the basis vector names, e.g. [\"e1\", \"e2\"]")
    if len(basis) > MAX_DIMENSION:
        r.fail("algebra.basis", f"{len(basis)} basis vectors: the dimension is limited to "
                                f"{MAX_DIMENSION}, since a multivector of a {len(basis)}-dimensional "
                                f"algebra has {2 ** len(basis)} components, beyond exact derivation "
                                "and the dense reference; model the subalgebra you need")
    seen: dict[str, int] = {}
    for i, b in enumerate(basis):
        if b in seen:
            r.fail(f"algebra.basis[{i}]", f"basis vector {b!r} is listed twice "
                                          f"(first at algebra.basis[{seen[b]}])")
        if b == "s":
            r.fail(f"algebra.basis[{i}]", "'s' names the scalar component; choose another name")
        seen[b] = i
    return basis


def _metric(r: _Reader, value, n: int):
    key = "algebra.metric"
    if not isinstance(value, list) or not value:
        r.fail(key, "expected a list of the squares of the basis vectors, or a full symmetric matrix")
    if all(isinstance(row, list) for row in value):
        return _matrix(r, value, n), False
    if len(value) != n:
        r.fail(key, f"{len(value)} entries for {n} basis vectors")
    diag = [r.rational(v, f"{key}[{i}]") for i, v in enumerate(value)]
    return tuple(tuple(diag[i] if i == j else Fraction(0) for j in range(n)) for i in range(n)), True


def _matrix(r: _Reader, rows, n: int):
    key = "algebra.metric"
    if len(rows) != n:
        r.fail(key, f"the metric matrix has {len(rows)} rows for {n} basis vectors")
    out = []
    for i, row in enumerate(rows):
        if len(row) != n:
            r.fail(f"{key}[{i}]", f"row {i} has {len(row)} entries; the matrix must be {n}x{n}")
        out.append(tuple(r.rational(v, f"{key}[{i}][{j}]") for j, v in enumerate(row)))
    for i in range(n):
        for j in range(i):
            if out[i][j] != out[j][i]:
                r.fail(f"{key}[{i}][{j}]", f"the metric matrix is not symmetric: entry [{i}][{j}] = "
                                           f"{out[i][j]} but [{j}][{i}] = {out[j][i]}")
    return tuple(out)


def _types(r: _Reader, value) -> tuple[TypeSpec, ...]:
    if not isinstance(value, dict):
        r.fail("types", f"expected a table of types, got {_kind(value)}: write each type as "
                        "[types.NAME] with 'grades' or 'blades'")
    out = []
    for name in value:
        key = f"types.{key_part(name)}"
        r.ident(name, key)
        body = r.table(value[name], key, ("grades", "blades"))
        if ("grades" in body) == ("blades" in body):
            r.fail(key, "give exactly one of 'grades' (a list of grades) or 'blades' (a list of blade names)")
        grades = r.ints(body["grades"], f"{key}.grades") if "grades" in body else None
        blades = r.strings(body["blades"], f"{key}.blades") if "blades" in body else None
        if not (grades or blades):
            r.fail(f"{key}.{'grades' if grades is not None else 'blades'}",
                   f"type {name!r} has no components")
        out.append(TypeSpec(name, grades, blades, key))
    return tuple(out)


def _kernels(r: _Reader, value) -> tuple[KernelSpec, ...]:
    if not isinstance(value, list):
        r.fail("kernels", "expected an array of tables: write each kernel under [[kernels]]")
    out, names = [], {}
    for i, body in enumerate(value):
        key = f"kernels[{i}]"
        r.table(body, key, KERNEL_KEYS, ("op", "args"))
        op = r.string(body["op"], f"{key}.op")
        args = r.strings(body["args"], f"{key}.args")
        name = body.get("name")
        name = r.ident(name, f"{key}.name") if name is not None else "_".join((op,) + args)
        if name in names:
            r.fail(f"{key}.name" if "name" in body else key,
                   f"kernel name {name!r} is already used by kernels[{names[name]}]; "
                   "give one of them a different 'name'")
        names[name] = i
        result = r.ident(body["result"], f"{key}.result") if "result" in body else None
        grades = r.ints(body["grades"], f"{key}.grades") if "grades" in body else None
        if grades == ():
            r.fail(f"{key}.grades", "an empty list keeps no grade; remove 'grades' to keep them all")
        options = tuple((k, r.string(body[k], f"{key}.{k}")) for k in OPTION_KEYS if k in body)
        out.append(KernelSpec(op, args, name, result, grades, key, options))
    return tuple(out)


def _targets(r: _Reader, value) -> dict:
    if value is None:
        return {t: {} for t in TARGETS}
    r.table(value, "targets", TARGETS)
    out = {}
    for t in TARGETS:
        if t in value:
            opts = dict(r.table(value[t], f"targets.{t}", TARGET_KEYS[t]))
            if "real" in opts and opts["real"] not in C_REALS:
                r.fail("targets.c.real", f"expected \"double\" or \"float\", got {shown(opts['real'])}")
            out[t] = opts
    if not out:
        r.fail("targets", "no target selected: add [targets.python], [targets.numba] or [targets.c]")
    return out


def _output(r: _Reader, value) -> str | None:
    if value is None:
        return None
    r.table(value, "output", ("dir",))
    return r.string(value["dir"], "output.dir") if "dir" in value else None
