"""`bladesmith init`: a commented starter spec for the algebra Cl(P, Q, R).

The basis has R null vectors first (named from e0), then P vectors squaring to +1 and Q to -1;
the types are vectors, bivectors and the even subalgebra (scalar and bivectors only above
EVEN_LIMIT dimensions, where the whole even subalgebra would be slow to multiply).  The text is
validated with the spec loader and the model before it is written, so a starter always loads.
"""
from __future__ import annotations

from pathlib import Path

import click

from . import model, spec as spec_mod
from .files import write_one
from .names import identifier_problem

INDEX_CHARS = "0123456789abcdefghijklmnopqrstuvwxyz"
EVEN_LIMIT = 6


class StarterError(click.ClickException):
    """A bad `init` request: `Error: ...` and exit 2 in the CLI."""

    exit_code = 2


TEMPLATE = '''\
# {file} - starter spec for {name}, the algebra Cl({p},{q},{r}) (written by `bladesmith init`).
# The loop: edit this file, look at what changes, regenerate, and check that the output is current.
#   bladesmith diff {file}     formula-level changes a build would make
#   bladesmith build {file}    write the kernels and {name}.manifest.json
#   bladesmith check {file}    exit 1 if the generated files are out of date
#   bladesmith show {file}     print the formulas and their operation counts

[algebra]
# name: module, file and C prefix (a C and Python identifier)
name = "{name}"
basis = [{basis}]
# metric: the squares of the basis vectors ({p} x +1, {q} x -1, {r} x 0); integers or "1/2"
metric = [{metric}]
{blades}
# Element types: `grades` lists components in canonical order (by grade, then basis order);
# `blades = [...]` lists explicit components in the order given.
[types.vector]
grades = [1]
{bivector}
# the {even_what}: rotors live here
[types.even]
grades = [{even}]

# Kernels. Operations: geometric, outer, left_contraction, right_contraction, scalar, fat_dot,
# hestenes_inner, commutator, add, sub (two arguments); reverse, involute, conjugate (one).
# `name` defaults to the op and the argument types joined with "_"; without `result`, the
# result is the declared type with exactly the blades that come out.
[[kernels]]
op = "geometric"
args = ["even", "even"]
name = "compose"
{compose_result}
[[kernels]]
op = "reverse"
args = ["even"]
{wedge}
# Targets: one table per wanted target (python, numba, c); with no table, all are emitted.
[targets.python]
# [targets.numba]
# [targets.c]
# real = "float"

# [output]
# dir = "generated/{name}"      # relative to this file; --out on the command line overrides it
'''

BLADES = '''# blades: optional preferred names; a name also fixes the orientation (e21 = -e12)
# blades = ["{example}"]
'''
BIVECTOR = "[types.bivector]\ngrades = [2]\n"
WEDGE = '''
[[kernels]]
op = "outer"
args = ["vector", "vector"]
name = "wedge"
'''


def parse_signature(text: str) -> tuple[int, int, int]:
    parts = [p.strip() for p in text.split(",")]
    if len(parts) not in (2, 3) or not all(p.isdigit() for p in parts):
        raise StarterError(f"--signature {text!r}: expected P,Q or P,Q,R (non-negative integers: "
                           "how many basis vectors square to +1, -1 and 0)")
    p, q, r = (int(x) for x in parts + ["0"] * (3 - len(parts)))
    n = p + q + r
    if not 1 <= n <= spec_mod.MAX_DIMENSION:
        raise StarterError(f"--signature {text!r}: {n} basis vectors; choose 1 to "
                           f"{spec_mod.MAX_DIMENSION}")
    return p, q, r


def basis(p: int, q: int, r: int) -> tuple[list[str], list[int]]:
    start = 0 if r else 1
    names = [f"e{INDEX_CHARS[start + i]}" for i in range(p + q + r)]
    return names, [0] * r + [1] * p + [-1] * q


def starter_text(name: str, signature: str, file: str) -> str:
    """The starter spec's text, checked by the spec loader and the model."""
    problem = identifier_problem(name)
    if problem:
        raise StarterError(f"NAME: {problem}")
    p, q, r = parse_signature(signature)
    text = TEMPLATE.format(file=file, name=name, p=p, q=q, r=r, **fields(*basis(p, q, r)))
    model.build(spec_mod.parse(text, Path(file), file, ""))
    return text


def fields(names: list[str], metric: list[int]) -> dict:
    """The parts of the template that depend on the dimension."""
    n, small = len(names), len(names) <= EVEN_LIMIT
    even = list(range(0, n + 1, 2)) if small else [0, 2]
    return dict(
        basis=", ".join(f'"{b}"' for b in names), metric=", ".join(map(str, metric)),
        blades=BLADES.format(example=f"e{names[-1][1:]}{names[0][1:]}") if n >= 2 else "",
        bivector=BIVECTOR if n >= 2 else "", even=", ".join(map(str, even)),
        even_what="even subalgebra" if small else "scalar and bivectors",
        compose_result='result = "even"\n' if small else "", wedge=WEDGE if n >= 2 else "")


def write_starter(name: str, signature: str, out: str | None, force: bool) -> Path:
    """Write the starter spec (atomically); refuses to replace a file unless `force`."""
    path = Path(out) if out else Path(f"{name}.toml")
    text = starter_text(name, signature, path.as_posix())
    if path.is_dir():
        raise StarterError(f"{path} is a directory; give a file name with --out")
    if path.exists() and not force:
        raise StarterError(f"{path} already exists; pass --force to overwrite it")
    path.parent.mkdir(parents=True, exist_ok=True)
    write_one(path, text.encode("utf-8"))
    return path
