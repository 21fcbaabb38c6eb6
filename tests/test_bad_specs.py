"""Broken and hostile specs: a located message, exit code 2, no traceback, nothing written.

Every file in `tests/specs/bad/` is one error class.  Its leading comments say what it expects:

    # expect-key: kernels[0].args[1]      the key path the message names (empty: none)
    # expect: unknown type 'pont'         a fragment the message must contain (one line each)
    # args: build {spec}                   the command line (default: build {spec} --out out)

and the line the message must point at ends with `# <- error`; a file without that marker expects
a message without a line number.  Each case runs in a fresh directory that already holds an
output directory from an earlier build; the whole tree, contents and mtimes, must be unchanged.

The rest of the file covers what one static file cannot: injection payloads in every naming role,
bytes that are not UTF-8, symbolic links, two builds racing for one directory, and the cost
budget (the estimate bounds the real derivation, and --max-terms moves the limit).
"""
from __future__ import annotations

import ast
import hashlib
import json
import os
import shutil
import subprocess
import sys
import textwrap
from dataclasses import dataclass
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings, strategies as st

from generator import budget, files as files_mod, model, pipeline, spec as spec_mod
from generator.cli import main

BAD = Path(__file__).resolve().parent / "specs" / "bad"
CASES = sorted(BAD.glob("*.toml"))
MARK = "# <- error"
OLD = 1_000_000_000          # mtime (2001) of the files of the "earlier build"


@dataclass(frozen=True)
class Expect:
    key: str
    fragments: tuple[str, ...]
    args: str
    line: int | None


def expectations(path: Path) -> Expect:
    lines = path.read_text(encoding="utf-8").splitlines()
    found = {"expect-key": [], "expect": [], "args": []}
    for text in lines:
        for tag in found:
            if text.startswith(f"# {tag}:"):
                found[tag].append(text[len(tag) + 3:].strip())
    marked = [i for i, text in enumerate(lines, start=1) if text.rstrip().endswith(MARK)]
    assert len(found["expect-key"]) == 1 and found["expect"] and len(marked) <= 1, path.name
    return Expect(found["expect-key"][0], tuple(found["expect"]),
                  (found["args"] or ["build {spec} --out out"])[0], marked[0] if marked else None)


def seed_output(out: Path) -> None:
    """An output directory as an earlier build left it, with old mtimes."""
    out.mkdir(parents=True)
    for name in ("drone.py", "drone.h", "drone.manifest.json"):
        (out / name).write_text(f"# earlier build: {name}\n")
        os.utime(out / name, ns=(OLD * 10**9, OLD * 10**9))


def snapshot(root: Path) -> dict:
    """Every path below root -> (bytes or None for a directory, mtime in ns)."""
    out = {}
    for p in sorted(root.rglob("*")):
        st_ = p.lstat()
        content = None if p.is_dir() else p.read_bytes()
        out[p.relative_to(root).as_posix()] = (content, st_.st_mtime_ns)
    return out


def invoke(args: list[str], cwd: Path, monkeypatch):
    monkeypatch.chdir(cwd)
    return CliRunner().invoke(main, args)


def assert_refused(result, prefix: str, fragments=()) -> str:
    """Exit 2, one printable `Error:` line on stderr that starts with prefix; returns the line."""
    assert result.exit_code == 2, result.output
    assert isinstance(result.exception, SystemExit), result.exception
    assert "Traceback" not in result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].isprintable(), lines[0]
    assert lines[0].startswith(prefix), (lines[0], prefix)
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


def test_corpus_is_there():
    assert len(CASES) >= 50


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.stem)
def test_bad_spec_is_refused(path, tmp_path, monkeypatch):
    exp = expectations(path)
    (tmp_path / "specs").mkdir()
    spec = tmp_path / "specs" / path.name
    spec.write_bytes(path.read_bytes())
    seed_output(tmp_path / "out")
    before = snapshot(tmp_path)
    result = invoke(exp.args.format(spec=f"specs/{path.name}").split(), tmp_path, monkeypatch)
    where = f"specs/{path.name}:{exp.line}" if exp.line else f"specs/{path.name}"
    assert_refused(result, f"Error: {where}: {exp.key}: " if exp.key else f"Error: {where}: ",
                   exp.fragments)
    assert snapshot(tmp_path) == before


# --- injection payloads in every role -------------------------------------------------------

PAYLOADS = ['a"b', "a'b", "a;b", "a\nb", "a*/b", "a/*b", "a\\b", "a b", "1ab", "a-b", "a.b", "",
            "r\u043etor", "\u0435", "a\u202eb", "a\x00b", "a\x1bb", "class", "def", "register",
            "nullptr", "import", "None", "__init__", "_private", "x" * 64]

DEFAULTS = {"name": "planar", "basis": "e2", "type": "motor", "kernel": "step"}
ROLES = {"name": "algebra.name", "basis": "algebra.basis[2]", "type": "types.",
         "kernel": "kernels[0].name"}

TEMPLATE = """\
[algebra]
name = {name}
basis = ["e0", "e1", {basis}]
metric = [0, 1, 1]
[types.{type}]
grades = [0, 2]
[[kernels]]
op = "reverse"
args = [{type}]
name = {kernel}
[targets.python]
"""


def _spec_with(role: str | None = None, payload: str = "") -> str:
    """The template with one role's name replaced; JSON string escapes are valid TOML."""
    values = {k: json.dumps(v) for k, v in DEFAULTS.items()}
    if role is not None:
        values[role] = json.dumps(payload)
    return TEMPLATE.format(**values)


@pytest.mark.parametrize("role", list(ROLES))
@pytest.mark.parametrize("payload", PAYLOADS, ids=lambda p: repr(p)[1:-1][:20] or "empty")
def test_injection_is_refused(role, payload, tmp_path, monkeypatch):
    (tmp_path / "s.toml").write_text(_spec_with(role, payload), encoding="utf-8")
    seed_output(tmp_path / "out")
    before = snapshot(tmp_path)
    result = invoke(["build", "s.toml", "--out", "out"], tmp_path, monkeypatch)
    line = assert_refused(result, "Error: s.toml:")
    assert f": {ROLES[role]}" in line
    assert snapshot(tmp_path) == before


def test_injection_template_builds_with_plain_names(tmp_path, monkeypatch):
    """The control: with ordinary names the injection template is a valid spec."""
    (tmp_path / "s.toml").write_text(_spec_with())
    result = invoke(["build", "s.toml", "--out", "out", "-q"], tmp_path, monkeypatch)
    assert result.exit_code == 0, result.output
    assert (tmp_path / "out" / "planar.py").is_file()


def test_quoted_key_path_is_escaped(tmp_path, monkeypatch):
    """A type name with a newline is shown escaped in the key path, at the header's line."""
    (tmp_path / "s.toml").write_text(_spec_with("type", "vec\nint"))
    result = invoke(["build", "s.toml", "--out", "out"], tmp_path, monkeypatch)
    assert_refused(result, 'Error: s.toml:5: types."vec\\nint": ', ["is not an identifier"])


# --- files that are not specs ----------------------------------------------------------------

def test_not_utf8(tmp_path, monkeypatch):
    (tmp_path / "s.toml").write_bytes(b'[algebra]\nname = "caf\xe9"\n')
    result = invoke(["build", "s.toml", "--out", "out"], tmp_path, monkeypatch)
    assert_refused(result, "Error: s.toml: ", ["not valid UTF-8"])
    assert not (tmp_path / "out").exists()


def test_missing_spec_file(tmp_path, monkeypatch):
    result = invoke(["build", "nowhere.toml", "--out", "out"], tmp_path, monkeypatch)
    assert_refused(result, "Error: nowhere.toml: ", ["cannot read the spec"])


def test_deep_nesting(tmp_path, monkeypatch):
    (tmp_path / "s.toml").write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    result = invoke(["build", "s.toml", "--out", "out"], tmp_path, monkeypatch)
    assert_refused(result, "Error: s.toml")


def test_long_value_is_shortened(tmp_path, monkeypatch):
    """A huge bad value is echoed shortened, not copied into the message whole."""
    (tmp_path / "s.toml").write_text(
        '[algebra]\nname = "drone"\nbasis = ["e1"]\nmetric = ["' + "x" * 100_000 + '"]\n')
    result = invoke(["build", "s.toml", "--out", "out"], tmp_path, monkeypatch)
    line = assert_refused(result, "Error: s.toml:4: algebra.metric[0]: ")
    assert len(line) < 300


def test_error_from_a_real_process(tmp_path):
    """The installed entry point, not just CliRunner: one Error line on stderr, exit 2."""
    spec = tmp_path / "s.toml"
    spec.write_bytes((BAD / "kernel_unknown_type.toml").read_bytes())
    proc = subprocess.run([sys.executable, "-c", "from generator.cli import main; main()",
                           "build", "s.toml", "--out", "out"], cwd=tmp_path, capture_output=True,
                          text=True)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert proc.stderr.startswith("Error: s.toml:") and proc.stderr.count("\n") == 1
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "out").exists()


# --- output paths -----------------------------------------------------------------------------

DRONE = """\
[algebra]
name = "drone"
basis = ["e1", "e2", "e3"]
metric = [1, 1, 1]
[types.rotor]
grades = [0, 2]
[[kernels]]
op = "geometric"
args = ["rotor", "rotor"]
name = "compose"
[targets.python]
"""


def _drone(tmp_path: Path, where: str, out_dir: str | None) -> Path:
    path = tmp_path / where
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(DRONE + (f'[output]\ndir = "{out_dir}"\n' if out_dir else ""))
    return path


def test_symlink_escape_is_refused(tmp_path, monkeypatch):
    work, outside = tmp_path / "work", tmp_path / "outside"
    outside.mkdir()
    _drone(work, "specs/drone.toml", "../gen/drone")
    (work / "gen").symlink_to(outside, target_is_directory=True)
    before = snapshot(tmp_path)
    result = invoke(["build", "specs/drone.toml"], work, monkeypatch)
    assert_refused(result, "Error: specs/drone.toml:13: output.dir: ",
                   ["'../gen/drone' resolves to", "outside the current directory"])
    assert snapshot(tmp_path) == before


def test_symlinked_spec_directory_escape_is_refused(tmp_path, monkeypatch):
    """The spec's own directory is a link out of the working tree; `dir = "."` follows it."""
    work, outside = tmp_path / "work", tmp_path / "outside"
    _drone(outside, "drone.toml", ".")
    work.mkdir()
    (work / "specs").symlink_to(outside, target_is_directory=True)
    before = snapshot(tmp_path)
    result = invoke(["build", "specs/drone.toml"], work, monkeypatch)
    assert_refused(result, "Error: specs/drone.toml:13: output.dir: ",
                   ["outside the current directory"])
    assert snapshot(tmp_path) == before


def test_symlink_loop_is_refused(tmp_path, monkeypatch):
    _drone(tmp_path, "drone.toml", "loop/x")
    (tmp_path / "loop").symlink_to(tmp_path / "loop")
    result = invoke(["build", "drone.toml"], tmp_path, monkeypatch)
    assert_refused(result, "Error: drone.toml:13: output.dir: ")


def test_dir_inside_the_working_tree_is_allowed(tmp_path, monkeypatch):
    """The controls: '..' and a link that stay inside the current directory are fine."""
    _drone(tmp_path, "specs/drone.toml", "../gen/drone")
    (tmp_path / "real").mkdir()
    (tmp_path / "gen").symlink_to(tmp_path / "real", target_is_directory=True)
    result = invoke(["build", "specs/drone.toml", "-q"], tmp_path, monkeypatch)
    assert result.exit_code == 0, result.output
    assert (tmp_path / "real" / "drone" / "drone.py").is_file()


def test_out_overrides_an_escaping_dir(tmp_path, monkeypatch):
    work = tmp_path / "work"
    _drone(work, "drone.toml", "../../elsewhere")
    result = invoke(["build", "drone.toml", "--out", str(tmp_path / "chosen"), "-q"], work,
                    monkeypatch)
    assert result.exit_code == 0, result.output
    assert (tmp_path / "chosen" / "drone.py").is_file()


def test_default_dir_is_generated_name(tmp_path, monkeypatch):
    _drone(tmp_path, "specs/drone.toml", None)
    result = invoke(["build", "specs/drone.toml", "-q"], tmp_path, monkeypatch)
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in (tmp_path / "generated" / "drone").iterdir()) == [
        "drone.manifest.json", "drone.py"]


# --- two builds racing for one directory -------------------------------------------------------

RACE = """\
[algebra]
name = "race"
basis = ["e1", "e2", "e3", "e4"]
metric = [1, 1, 1, -1]
[types.even]
grades = [0, 2, 4]
[types.vec]
grades = [1]
{kernels}
"""


def _race_spec(path: Path, ops: list[str]) -> None:
    kernels = "".join(f'[[kernels]]\nop = "{op}"\nargs = ["even", "{arg}"]\n'
                      for op, arg in (o.split(":") for o in ops))
    path.write_text(RACE.format(kernels=kernels))


def _cli(*args) -> list[str]:
    return [sys.executable, "-c", "from generator.cli import main; main()", *args]


def test_concurrent_builds_leave_a_consistent_directory(tmp_path):
    """Two processes build different specs of one algebra (the same work in a different kernel
    order, so they reach the write phase together) into one directory."""
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    _race_spec(a, ["geometric:even", "sandwich:vec", "outer:vec"])
    _race_spec(b, ["outer:vec", "sandwich:vec", "geometric:even"])
    versions: dict[str, set[bytes]] = {}
    for spec, ref in ((a, "ref_a"), (b, "ref_b")):
        subprocess.run(_cli("build", spec.name, "--out", ref, "-q"), cwd=tmp_path, check=True)
        for f in (tmp_path / ref).iterdir():
            versions.setdefault(f.name, set()).add(f.read_bytes())
    assert all(len(v) == 2 for v in versions.values()), "the two builds must differ in every file"
    for round_ in range(3):
        shared = tmp_path / f"shared{round_}"
        procs = [subprocess.Popen(_cli("build", s.name, "--out", shared.name, "-q"), cwd=tmp_path)
                 for s in (a, b)]
        assert [p.wait() for p in procs] == [0, 0]
        files = {f.name: f.read_bytes() for f in shared.iterdir()}
        for name, data in files.items():
            assert data in versions[name], name
        listed = json.loads(files["race.manifest.json"])["files"]
        assert sorted([*listed, "race.manifest.json"]) == sorted(files)
        for name, digest in listed.items():
            assert hashlib.sha256(files[name]).hexdigest() == digest, name


def test_writers_hold_an_exclusive_lock(tmp_path, monkeypatch):
    """Every file of a build is written while the directory is locked against other writers
    (probed from a separate descriptor, which flock treats like another process)."""
    fcntl = pytest.importorskip("fcntl")
    probes = []
    real = files_mod.write_one

    def probing(path, data):
        fd = os.open(path.parent, os.O_RDONLY)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            probes.append("free")
        except BlockingIOError:
            probes.append("held")
        finally:
            os.close(fd)
        return real(path, data)

    monkeypatch.setattr(files_mod, "write_one", probing)
    files_mod.write_files(tmp_path / "out", {"x.py": "1\n", "x.h": "2\n", "x.manifest.json": "{}\n"})
    assert probes == ["held"] * 3
    fd = os.open(tmp_path / "out", os.O_RDONLY)
    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)       # released afterwards
    os.close(fd)


def test_file_names_must_be_plain(tmp_path):
    for name in ("../x.py", "sub/x.py", ".hidden", "x\\y.py", "a b.py", ""):
        with pytest.raises(ValueError):
            files_mod.write_files(tmp_path / "out", {name: "x"})
    assert not (tmp_path / "out").exists()


# --- the cost budget ---------------------------------------------------------------------------

def _spec(tmp_path: Path, text: str) -> spec_mod.Spec:
    path = tmp_path / "s.toml"
    path.write_text(textwrap.dedent(text))
    return spec_mod.load(path)


def _full_product(n: int, metric: str | None = None) -> str:
    basis = ", ".join(f'"v{i}"' for i in range(n))
    return (f'[algebra]\nname = "cost"\nbasis = [{basis}]\nmetric = {metric or [1] * n}\n'
            f'[types.full]\ngrades = {list(range(n + 1))}\n'
            '[[kernels]]\nop = "geometric"\nargs = ["full", "full"]\n[targets.python]\n')


def test_max_terms_moves_the_limit(tmp_path, monkeypatch):
    """A 7-dimensional full product has 4^7 = 16384 blade pairs: refused below, built above."""
    (tmp_path / "s.toml").write_text(_full_product(7))
    low = invoke(["build", "s.toml", "--out", "out", "--max-terms", "16000"], tmp_path, monkeypatch)
    assert_refused(low, "Error: s.toml:7: kernels[0]: ", ["above the budget of 16,000", "Prune"])
    assert not (tmp_path / "out").exists()
    high = invoke(["build", "s.toml", "--out", "out", "--max-terms", "17000", "-q"], tmp_path,
                  monkeypatch)
    assert high.exit_code == 0, high.output
    again = invoke(["build", "s.toml", "--out", "out2", "-q"], tmp_path, monkeypatch)
    assert again.exit_code == 0, "the default budget comes back for the next command"


@pytest.mark.parametrize("command", ["build", "verify", "check", "diff", "show"])
def test_every_deriving_command_takes_max_terms(command, tmp_path, monkeypatch):
    (tmp_path / "s.toml").write_text(_full_product(3))
    args = [command, "s.toml"] + ([] if command == "show" else ["--out", "out"])
    result = invoke([*args, "--max-terms", "10"], tmp_path, monkeypatch)
    assert_refused(result, "Error: s.toml:7: kernels[0]: ", ["above the budget of 10"])


def test_two_specs_for_one_output_directory(tmp_path, monkeypatch):
    """Both specs are valid, but their files would overwrite each other: nothing is written."""
    _drone(tmp_path, "a.toml", None)
    _drone(tmp_path, "b.toml", None)
    result = invoke(["build", "a.toml", "b.toml", "--out", "out"], tmp_path, monkeypatch)
    assert_refused(result, "Error: b.toml:2: algebra.name: ", ["would overwrite the output of a.toml"])
    assert not (tmp_path / "out").exists()


def test_max_terms_must_be_positive(tmp_path, monkeypatch):
    (tmp_path / "s.toml").write_text(_full_product(2))
    result = invoke(["build", "s.toml", "--max-terms", "0"], tmp_path, monkeypatch)
    assert result.exit_code == 2 and "Traceback" not in result.output


def test_diagonal_estimate_is_the_pair_count(tmp_path):
    m = model.build(_spec(tmp_path, _full_product(5)))
    (_, _, terms), = budget.estimate(m)
    assert terms == (2 ** 5) ** 2 + budget.KERNEL


SMALL_METRICS = [[1, 1, 1, 1], [0, 1, 1, -1],
                 [[0, -1, 0, 0], [-1, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]],
                 [[2, 1, 1, 1], [1, 2, 1, 1], [1, 1, 2, 1], [1, 1, 1, 2]]]
BILINEAR = ["geometric", "outer", "left_contraction", "scalar", "fat_dot", "commutator", "regressive"]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(metric=st.sampled_from(SMALL_METRICS), op=st.sampled_from(BILINEAR),
       ga=st.sets(st.integers(0, 4), min_size=1), gb=st.sets(st.integers(0, 4), min_size=1))
def test_estimate_bounds_the_derived_terms(tmp_path, metric, op, ga, gb):
    """Whatever the metric, a product never derives more terms than the budget estimated."""
    text = (f'[algebra]\nname = "cost"\nbasis = ["e1", "e2", "e3", "e4"]\nmetric = {metric}\n'
            f'[types.a]\ngrades = {sorted(ga)}\n[types.b]\ngrades = {sorted(gb)}\n'
            f'[[kernels]]\nop = "{op}"\nargs = ["a", "b"]\n[targets.python]\n')
    spec = _spec(tmp_path, text)
    (_, _, estimated), = budget.estimate(model.build(spec))
    try:
        module = pipeline.derive_module(spec)
    except spec_mod.SpecError as exc:
        assert "structurally zero" in exc.message
        return
    derived = sum(len(f.terms) for k in module.kernels for f in k.formulas)
    assert derived <= estimated


def test_non_orthogonal_metric_costs_more(tmp_path):
    diagonal = model.build(_spec(tmp_path, _full_product(4)))
    dense = model.build(_spec(tmp_path, _full_product(4, str(SMALL_METRICS[3]))))
    assert budget.estimate(dense)[0][2] > budget.estimate(diagonal)[0][2]


# --- names at the edge of what is allowed ----------------------------------------------------

EDGE = """\
# legal names that sit next to keywords, macros and the emitters' own names
[algebra]
name = "sorter"
basis = ["o", "x", "y"]
metric = [0, 1, 1]
blades = ["x^o", "y^x"]
[types.classy]
grades = [0, 2]
[types.int8]
grades = [1]
[types.t_]
grades = [3]
[[kernels]]
op = "sandwich"
args = ["classy", "int8"]
name = "returns"
[[kernels]]
op = "outer"
args = ["int8", "int8"]
name = "delete_"
[[kernels]]
op = "geometric"
args = ["classy", "t_"]
name = "typesx"
"""


def test_edge_names_build_code_that_only_does_arithmetic(tmp_path, monkeypatch):
    """Near-keyword names are accepted, and what they produce parses and compiles: the pure
    Python module runs nothing at import but its definitions, the header compiles as C and C++."""
    (tmp_path / "s.toml").write_text(EDGE)
    result = invoke(["build", "s.toml", "--out", "out", "-q"], tmp_path, monkeypatch)
    assert result.exit_code == 0, result.output
    tree = ast.parse((tmp_path / "out" / "sorter.py").read_text())
    kinds = {type(node).__name__ for node in tree.body}
    assert kinds <= {"Expr", "Import", "Assign", "FunctionDef"}, kinds
    assert all(a.name == "math" for node in tree.body if isinstance(node, ast.Import)
               for a in node.names)
    ast.parse((tmp_path / "out" / "sorter_numba.py").read_text())
    if shutil.which("gcc") is None or shutil.which("g++") is None:
        pytest.skip("gcc/g++ not installed: the header was not compiled")
    (tmp_path / "use.c").write_text('#include "out/sorter.h"\nint main(void) { return 0; }\n')
    for compiler, std in (("gcc", "-std=c99"), ("g++", "-std=c++17")):
        lang = ["-x", "c++"] if compiler == "g++" else []
        done = subprocess.run([compiler, std, *lang, "-Wall", "-Werror", "-fsyntax-only", "use.c"],
                              cwd=tmp_path, capture_output=True, text=True)
        assert done.returncode == 0, done.stderr


def test_spec_path_in_banners_is_escaped(tmp_path, monkeypatch):
    """The spec's path is the one piece of free text that reaches the emitted comments."""
    weird = tmp_path / "ev*" / '*il\n"""x\\y.toml'      # "ev*/*il...": both */ and /*
    weird.parent.mkdir()
    weird.write_text(DRONE.replace("[targets.python]\n", ""))
    result = invoke(["build", str(weird.relative_to(tmp_path)), "--out", "out", "-q"], tmp_path,
                    monkeypatch)
    assert result.exit_code == 0, result.output
    for name in ("drone.py", "drone_numba.py"):
        text = (tmp_path / "out" / name).read_text()
        ast.parse(text)
        assert text.splitlines()[0].startswith("# Generated by bladesmith from ev")
    header = (tmp_path / "out" / "drone.h").read_text().splitlines()[0]
    assert header.startswith("/* Generated") and header.endswith("*/")
    assert header.count("*/") == 1 and header.count("/*") == 1
