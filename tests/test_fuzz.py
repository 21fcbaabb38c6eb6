"""Fuzzing spec documents: bladesmith builds, or refuses with one `Error:` line and exit code 2.

Never a traceback, never another exit code, never a hang (every run has a low --max-terms, so the
cost budget bounds the derivation).  Four sources of documents:

* random TOML documents: tables, values and nesting over the spec's own vocabulary and noise;
* spec-shaped documents: an algebra, types and kernels drawn from plausible parts, so the model,
  derivation and emitters are reached, not just the schema;
* structural mutations of the example specs in `specs/` (drop, replace, retype, rename a key,
  duplicate a kernel);
* text mutations of the same files (delete, duplicate or swap lines, insert a character).

A build that succeeds must also have written Python that parses and a manifest that loads.
Documents are written with a tiny TOML writer below (JSON string escapes are valid TOML).
"""
from __future__ import annotations

import ast
import json
import os
import tempfile
import tomllib
from pathlib import Path

from click.testing import CliRunner
from hypothesis import HealthCheck, event, given, settings, strategies as st

from generator.cli import main
from generator.ops import CATALOGUE

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((ROOT / "specs").glob("*.toml"))
MAX_TERMS = "10000"      # above every example spec, far below a slow build
# BLADESMITH_FUZZ_EXAMPLES=5000 fuzzes deeper; the default keeps the file near ten seconds
FUZZ_EXAMPLES = int(os.environ.get("BLADESMITH_FUZZ_EXAMPLES", "300"))
FUZZ = settings(max_examples=FUZZ_EXAMPLES, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

KEYS = ["algebra", "name", "basis", "metric", "blades", "types", "grades", "kernels", "op", "args",
        "result", "targets", "python", "numba", "c", "real", "output", "dir", "motor", "vec"]
WORDS = ["e0", "e1", "e2", "e12", "e21", "s", "motor", "vec", "python", "double", "float", "1/2",
         "-1", "../x", "class", "a b", "", "\n", "*/"] + list(CATALOGUE)


# --- a tiny TOML writer ---------------------------------------------------------------------

def toml_key(key: str) -> str:
    return json.dumps(key, ensure_ascii=False)


def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return "{" + ", ".join(f"{toml_key(k)} = {toml_value(v)}" for k, v in value.items()) + "}"


def toml_doc(doc: dict) -> str:
    return "".join(f"{toml_key(k)} = {toml_value(v)}\n" for k, v in doc.items())


# --- running bladesmith ------------------------------------------------------------------------

def assert_builds_or_refuses(text: str) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        spec, out = Path(tmp) / "s.toml", Path(tmp) / "out"
        spec.write_text(text, encoding="utf-8")
        result = CliRunner().invoke(main, ["build", str(spec), "--out", str(out), "-q",
                                           "--max-terms", MAX_TERMS])
        assert result.exception is None or isinstance(result.exception, SystemExit), (
            f"{type(result.exception).__name__}: {result.exception}\n--- spec ---\n{text}")
        assert "Traceback" not in result.output
        assert result.exit_code in (0, 2), result.output
        event("built" if result.exit_code == 0 else "refused")
        if result.exit_code == 2:
            lines = result.stderr.splitlines()
            assert len(lines) == 1 and lines[0].startswith("Error: "), result.stderr
            assert lines[0].isprintable()
        else:
            _assert_output_readable(out)


def _assert_output_readable(out: Path) -> None:
    names = sorted(p.name for p in out.iterdir())
    assert any(n.endswith(".manifest.json") for n in names), names
    for p in out.iterdir():
        if p.suffix == ".py":
            ast.parse(p.read_text(encoding="utf-8"))
        if p.suffix == ".json":
            json.loads(p.read_text(encoding="utf-8"))


# --- random documents --------------------------------------------------------------------------

scalars = st.one_of(st.booleans(), st.integers(-3, 20), st.floats(allow_nan=True, width=32),
                    st.text(max_size=6), st.sampled_from(WORDS))
keys = st.one_of(st.sampled_from(KEYS), st.text(max_size=5))
values = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(keys, inner, max_size=4)), max_leaves=12)


@FUZZ
@given(doc=st.dictionaries(keys, values, max_size=5))
def test_random_documents(doc):
    assert_builds_or_refuses(toml_doc(doc))


@st.composite
def shaped(draw) -> dict:
    """A document shaped like a spec, mostly valid: the mutations below break it."""
    n = draw(st.integers(1, 5))
    basis = [f"e{i}" for i in range(n)]
    entry = st.sampled_from([-1, 0, 1, 1, 2, "1/2", "-3/4"])
    diagonal = st.lists(entry, min_size=n, max_size=n)
    metric = draw(st.one_of(diagonal, diagonal.map(lambda d: [
        [d[i] if i == j else int(i + j == n - 1 and n > 1) for j in range(n)] for i in range(n)])))
    names = draw(st.lists(st.sampled_from(["motor", "vec", "biv", "full"]), min_size=1, max_size=3,
                          unique=True))
    grades = st.lists(st.integers(0, n), min_size=1, max_size=3, unique=True)
    kernel = st.sampled_from(list(CATALOGUE)).flatmap(lambda op: st.fixed_dictionaries(
        {"op": st.just(op), "args": st.lists(st.sampled_from(names), min_size=CATALOGUE[op].arity,
                                             max_size=CATALOGUE[op].arity)},
        optional={"name": st.sampled_from(["step", "motor", "x_batch", "turn"]),
                  "result": st.sampled_from(names), "grades": grades}))
    return {"algebra": {"name": draw(st.sampled_from(["toy", "arm"])), "basis": basis,
                        "metric": metric},
            "types": {t: {"grades": draw(grades)} for t in names},
            "kernels": draw(st.lists(kernel, min_size=1, max_size=3)),
            "targets": {t: {} for t in draw(st.sets(st.sampled_from(["python", "numba", "c"]),
                                                    min_size=1))}}


@FUZZ
@given(doc=shaped(), data=st.data())
def test_spec_shaped_documents(doc, data):
    mutate_some(doc, data.draw, data.draw(st.integers(0, 2)))
    assert_builds_or_refuses(toml_doc(doc))


# --- mutations of the example specs ------------------------------------------------------------

def _paths(node, prefix=()):
    """Every (container path, key or index) in a parsed document."""
    items = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(
        node, list) else ()
    for k, v in items:
        yield prefix, k
        yield from _paths(v, prefix + (k,))


def _at(doc, path):
    for k in path:
        doc = doc[k]
    return doc


def mutate(doc: dict, where: tuple, action: str, value) -> None:
    parent, key = _at(doc, where[0]), where[1]
    if action == "delete":
        del parent[key]
    elif action == "replace":
        parent[key] = value
    elif action == "wrap":
        parent[key] = [parent[key]]
    elif action == "stringify":
        parent[key] = str(parent[key])
    elif action == "rename" and isinstance(parent, dict):
        parent[f"{key}s" if key[-1:] != "s" else key[:-1]] = parent.pop(key)
    elif action == "duplicate" and isinstance(parent, list):
        parent.append(parent[key])


def mutate_some(doc: dict, draw, times: int) -> None:
    for _ in range(times):
        paths = list(_paths(doc))
        if not paths:
            return
        mutate(doc, draw(st.sampled_from(paths)), draw(st.sampled_from(
            ["delete", "replace", "wrap", "stringify", "rename", "duplicate"])), draw(values))


@st.composite
def mutated_example(draw) -> dict:
    doc = tomllib.loads(draw(st.sampled_from(EXAMPLES)).read_text(encoding="utf-8"))
    mutate_some(doc, draw, draw(st.integers(1, 3)))
    return doc


@FUZZ
@given(doc=mutated_example())
def test_mutated_examples(doc):
    assert_builds_or_refuses(toml_doc(doc))


@st.composite
def edited_example(draw) -> str:
    lines = draw(st.sampled_from(EXAMPLES)).read_text(encoding="utf-8").splitlines()
    for _ in range(draw(st.integers(1, 3))):
        i, j = draw(st.integers(0, len(lines) - 1)), draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["delete", "duplicate", "swap", "insert"]))
        if action == "delete" and len(lines) > 1:
            del lines[i]
        elif action == "duplicate":
            lines.insert(j, lines[i])
        elif action == "swap":
            lines[i], lines[j] = lines[j], lines[i]
        elif action == "insert":
            pos = draw(st.integers(0, len(lines[i])))
            char = draw(st.sampled_from(list("[]{}\"'=,.#\\\n\t\x00\u0435 0a")))
            lines[i] = lines[i][:pos] + char + lines[i][pos:]
    return "\n".join(lines) + "\n"


@FUZZ
@given(text=edited_example())
def test_edited_examples(text):
    assert_builds_or_refuses(text)


def test_examples_build_as_the_fuzzing_baseline():
    """The control: every unmutated example builds under the fuzzing budget."""
    assert EXAMPLES
    for path in EXAMPLES:
        with tempfile.TemporaryDirectory() as tmp:
            result = CliRunner().invoke(main, ["build", str(path), "--out", tmp, "-q",
                                               "--max-terms", MAX_TERMS])
            assert result.exit_code == 0, (path.name, result.output)
