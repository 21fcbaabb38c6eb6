"""The regeneration workflow (issue 6): check, diff, show, table, init, progress, determinism.

Every command runs through click's CliRunner in a temporary directory; the specs are written
here, in scenarios of our own (a pick-and-place arm in Cl(3,0,1), a drone attitude loop in
Cl(3,0)).  Where a test checks mathematics, the expected values are derived in the test from the
sources named beside them, never copied from bladesmith's output:

- the blade product rule for an orthogonal basis, e_A e_B = s(A, B) * prod_{i in A&B} m_i * e_{A^B},
  with s(A, B) the parity of the pairs (i in A, j in B, i > j) (Dorst, Fontijne & Mann, *Geometric
  Algebra for Computer Science*, 2007, ch. 19), re-implemented in `published_product` below;
- the Pauli matrices as a matrix representation of Cl(3,0) (Pauli, 1927; common practice);
- the operation-count rule of DESIGN section 5 (one multiply per product of two variables, one
  add per + or - between terms, negation free);
- the PNG signature and IHDR layout of the PNG specification (ISO/IEC 15948:2004, sections 5.2
  and 11.2.2).
"""
from __future__ import annotations

import io
import json
import os
import struct
import subprocess
import sys
from fractions import Fraction
from itertools import combinations
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from generator import derive, diff as diff_mod, pipeline  # noqa: E402
from generator.cli import main  # noqa: E402
from generator.progress import Progress, interactive  # noqa: E402
from generator.diffview import dot_for, use_colour  # noqa: E402

ARM = """\
# pick-and-place arm: rigid motions of the gripper in Cl(3,0,1) (a test scenario)
[algebra]
name = "arm"
basis = ["e0", "e1", "e2", "e3"]
metric = [0, 1, 1, 1]

[types.motor]
grades = [0, 2, 4]
[types.line]
grades = [2]
[types.vec]
grades = [1]
[types.scal]
grades = [0]

[[kernels]]
op = "geometric"
args = ["motor", "motor"]
name = "compose"
result = "motor"

[[kernels]]
op = "scalar"
args = ["line", "line"]
name = "line_norm"

[[kernels]]
op = "outer"
args = ["vec", "vec"]
name = "wedge"

[targets.python]
"""

DRONE = """\
# drone attitude loop: rotor composition in Cl(3,0) (a test scenario)
[algebra]
name = "drone"
basis = ["e1", "e2", "e3"]
metric = [1, 1, 1]
{blades}
[types.rotor]
grades = [0, 2]
[types.vec]
grades = [1]
[types.full]
grades = [0, 1, 2, 3]

[[kernels]]
op = "geometric"
args = ["rotor", "rotor"]
name = "compose"
result = "rotor"

[[kernels]]
op = "outer"
args = ["vec", "vec"]
name = "wedge"

[targets.python]
"""


@pytest.fixture
def work(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("NO_COLOR", raising=False)
    return tmp_path


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def built(work: Path, text: str = ARM, name: str = "arm.toml", out: str = "out"):
    spec = write(work / name, text)
    r = run("build", spec.name, "--out", out, "--quiet")
    assert r.exit_code == 0, r.output
    return spec, Path(out)          # relative to the working directory, `work`


# ---------------------------------------------------------------- the published product rule
def indices(bitmap: int) -> list[int]:
    return [i for i in range(bitmap.bit_length()) if bitmap >> i & 1]


def published_product(a: int, b: int, metric) -> tuple[int, int]:
    """(bitmap, coefficient) of e_a e_b: Dorst, Fontijne & Mann 2007, ch. 19 (see module doc)."""
    swaps = sum(1 for i in indices(a) for j in indices(b) if i > j)
    coef = -1 if swaps % 2 else 1
    for i in indices(a & b):
        coef *= metric[i]
    return a ^ b, coef


def name_of(bitmap: int, basis) -> str:
    return "s" if not bitmap else "e" + "".join(basis[i][1:] for i in indices(bitmap))


def grade_blades(n: int, grades) -> list[int]:
    return [sum(1 << i for i in c) for g in grades for c in combinations(range(n), g)]


# ------------------------------------------------------------------------------------ check
def test_check_fresh_output_is_current(work):
    spec, out = built(work)
    r = run("check", spec.name, "--out", out)
    assert r.exit_code == 0, r.output
    assert "arm.toml: current" in r.stdout


def test_check_fast_path_does_not_derive(work, monkeypatch):
    spec, out = built(work)

    class Derived(Exception):
        pass

    def forbidden(*args, **kwargs):
        raise Derived("the fast path must not derive")

    monkeypatch.setattr(derive, "derive", forbidden)
    monkeypatch.setattr(pipeline, "derive_module", forbidden)
    assert run("check", spec.name, "--out", out).exit_code == 0
    # the same patch is hit as soon as the spec changes, so the assertion above can fail
    write(spec, ARM.replace("[0, 1, 1, 1]", "[1, 1, 1, 1]"))
    r = run("check", spec.name, "--out", out)
    assert isinstance(r.exception, Derived)


def test_check_after_spec_edit_lists_stale_files(work):
    spec, out = built(work)
    write(spec, ARM.replace("[0, 1, 1, 1]", "[1, 1, 1, 1]"))
    r = run("check", spec.name, "--out", out)
    assert r.exit_code == 1, r.output
    assert "stale        arm.py" in r.stdout
    assert "stale        arm.manifest.json" in r.stdout
    assert "regenerate with: bladesmith build arm.toml --out out" in r.stdout
    assert run("build", spec.name, "--out", out, "-q").exit_code == 0
    assert run("check", spec.name, "--out", out).exit_code == 0


def test_check_names_a_hand_edited_file(work):
    spec, out = built(work)
    with open(out / "arm.py", "a", encoding="utf-8") as fh:
        fh.write("# tweaked by hand\n")
    r = run("check", spec.name, "--out", out)
    assert r.exit_code == 1
    assert "hand-edited  arm.py" in r.stdout
    assert "arm.manifest.json" not in r.stdout       # the manifest itself is still current


def test_check_reports_a_missing_file(work):
    spec, out = built(work)
    (out / "arm.py").unlink()
    r = run("check", spec.name, "--out", out)
    assert r.exit_code == 1 and "missing      arm.py" in r.stdout


def test_check_full_finds_what_the_fast_path_trusts(work):
    """A manifest entry for a file the spec does not generate: trusted by hashes, found by --full."""
    spec, out = built(work)
    (out / "arm.h").write_text("/* left over */\n", encoding="utf-8")
    doc = json.loads((out / "arm.manifest.json").read_text(encoding="utf-8"))
    import hashlib
    doc["files"]["arm.h"] = hashlib.sha256(b"/* left over */\n").hexdigest()
    (out / "arm.manifest.json").write_text(json.dumps(doc, indent=2) + "\n", encoding="utf-8")
    assert run("check", spec.name, "--out", out).exit_code == 0
    r = run("check", spec.name, "--out", out, "--full")
    assert r.exit_code == 1
    assert "obsolete     arm.h" in r.stdout and "stale        arm.manifest.json" in r.stdout


def test_check_bad_spec_exits_2_with_location(work):
    spec, out = built(work)
    write(spec, ARM.replace('args = ["line", "line"]', 'args = ["line", "lime"]'))
    r = run("check", spec.name, "--out", out)
    assert r.exit_code == 2
    line = ARM.splitlines().index('args = ["line", "line"]') + 1
    assert f"arm.toml:{line}: kernels[1].args[1]: unknown type 'lime'" in r.stderr
    assert "Traceback" not in r.output


# ------------------------------------------------------------------------------------- diff
def diff_json(*args):
    r = run("diff", *args, "--json")
    return r.exit_code, json.loads(r.stdout)


def kernel_entry(doc: dict, name: str) -> dict:
    return next(k for k in doc["kernels"] if k["name"] == name)


def test_diff_null_vector_made_positive_reports_exact_terms(work):
    """e0 squares to 0 -> +1.  e0i e0i = e0 ei e0 ei = -(e0 e0)(ei ei) (one swap of anticommuting
    vectors; Dorst et al. 2007, ch. 19), so the scalar product of two lines gains
    -a.e0i*b.e0i for i = 1, 2, 3 and keeps its other terms."""
    old = write(work / "old.toml", ARM)
    new = write(work / "new.toml", ARM.replace("[0, 1, 1, 1]", "[1, 1, 1, 1]"))
    r = run("diff", old.name, new.name)
    assert r.exit_code == 1, r.output
    lines = r.stdout.splitlines()
    assert "metric e0·e0: 0 -> 1" in lines
    start = lines.index("kernel line_norm: scalar(line, line) -> scal")
    block = lines[start + 1:start + 5]
    # counts (DESIGN section 5): 3 products and 2 signs before, 6 products and 5 signs after
    assert block == ["  cost: 3 mul, 2 add -> 6 mul, 5 add",
                     "  line_norm.s -= a.e01·b.e01  (new term)",
                     "  line_norm.s -= a.e02·b.e02  (new term)",
                     "  line_norm.s -= a.e03·b.e03  (new term)"]
    assert not any(line.startswith("kernel wedge") for line in lines)   # the outer product is metric-free


def test_diff_null_vector_motor_terms_follow_the_product_rule(work):
    """Only blade pairs that share e0 depend on e0's square: with m0 = 0 they vanished, with
    m0 = 1 each adds s(A, B) * prod m_i a.A*b.B to component A^B (published rule, see top)."""
    basis, m_new = ["e0", "e1", "e2", "e3"], [1, 1, 1, 1]
    motor = grade_blades(4, [0, 2, 4])
    expected = set()
    for a in motor:
        for b in motor:
            if a & b & 1:
                c, coef = published_product(a, b, m_new)
                expected.add((name_of(c, basis), f"a.{name_of(a, basis)}*b.{name_of(b, basis)}",
                              "added", str(coef)))
    write(work / "old.toml", ARM)
    write(work / "new.toml", ARM.replace("[0, 1, 1, 1]", "[1, 1, 1, 1]"))
    code, doc = diff_json("old.toml", "new.toml")
    assert code == 1
    compose = kernel_entry(doc, "compose")
    reported = {(c["component"], t["term"], t["change"], t["new"])
                for c in compose["components"] for t in c["terms"]}
    assert reported == expected and len(expected) == 16
    assert doc["notes"] == [{"what": "metric", "subject": "e0*e0", "old": "0", "new": "1"}]


def test_diff_blade_rename_reports_the_sign_changes(work):
    """Naming e13 as e31 (= -e13) flips the sign of every term in which that blade occurs an odd
    number of times among the output component and the two factors; the others are unchanged.
    Old coefficients from the published product rule in Cl(3,0)."""
    basis, metric = ["e1", "e2", "e3"], [1, 1, 1]
    rotor, e13 = grade_blades(3, [0, 2]), 0b101
    rename = {"e13": "e31"}
    expected = set()
    for a in rotor:
        for b in rotor:
            c, coef = published_product(a, b, metric)
            flips = [a, b, c].count(e13)
            if flips % 2:
                names = [rename.get(name_of(x, basis), name_of(x, basis)) for x in (c, a, b)]
                expected.add((names[0], f"a.{names[1]}*b.{names[2]}", str(coef), str(-coef)))
    write(work / "old.toml", DRONE.format(blades=""))
    write(work / "new.toml", DRONE.format(blades='blades = ["e31"]'))
    code, doc = diff_json("old.toml", "new.toml")
    assert code == 1
    compose = kernel_entry(doc, "compose")
    reported = {(c["component"], t["term"], t["old"], t["new"])
                for c in compose["components"] for t in c["terms"] if t["change"] == "coefficient"}
    assert reported == expected and expected
    assert all(t["change"] == "coefficient" for c in compose["components"] for t in c["terms"])
    assert {"what": "blade", "subject": "e13", "old": "e13",
            "new": "e31 (orientation flipped: e31 = -e13)"} in doc["notes"]
    # by hand: e13 e23 = e1 e3 e2 e3 = -e1 e2 e3 e3 = -e12 and e31 e23 = e3 e1 e2 e3 = +e12
    text = run("diff", "old.toml", "new.toml").stdout
    assert "  compose.e12: a.e31·b.e23 coefficient -1 -> 1" in text.splitlines()


def test_diff_identical_specs_print_nothing(work):
    write(work / "a.toml", ARM)
    write(work / "b.toml", ARM + "\n# only a comment differs\n")
    r = run("diff", "a.toml", "b.toml")
    assert r.exit_code == 0 and r.output == ""
    code, doc = diff_json("a.toml", "b.toml")
    assert code == 0 and doc["changed"] is False and doc["kernels"] == []


def test_diff_spec_against_its_built_manifest(work):
    """`diff SPEC` parses the manifest's formula text; it must agree with the in-memory diff."""
    spec, out = built(work)
    assert run("diff", spec.name, "--out", out).output == ""          # built = current
    write(work / "old.toml", ARM)
    write(spec, ARM.replace("[0, 1, 1, 1]", "[1, 1, 1, 1]"))
    code, against_manifest = diff_json(spec.name, "--out", out)
    code2, between_specs = diff_json("old.toml", spec.name)
    assert code == code2 == 1
    assert against_manifest["kernels"] == between_specs["kernels"]
    assert against_manifest["notes"] == between_specs["notes"]


def test_diff_kernel_added_removed_and_result_changed(work):
    old = ARM.replace('name = "wedge"', 'name = "wedge"\nresult = "motor"')
    new = ARM.replace('name = "line_norm"', 'name = "line_dot"')
    write(work / "old.toml", old)
    write(work / "new.toml", new)
    r = run("diff", "old.toml", "new.toml")
    lines = r.stdout.splitlines()
    assert r.exit_code == 1
    assert "+ kernel line_dot: scalar(line, line) -> scal (1 components)" in lines
    assert "- kernel line_norm: scalar(line, line) -> scal (1 components)" in lines
    assert "  result: motor -> line" in lines


def test_diff_without_a_build_lists_every_kernel(work):
    write(work / "arm.toml", ARM)
    r = run("diff", "arm.toml", "--out", "nowhere")
    assert r.exit_code == 1
    assert sum(line.startswith("+ kernel ") for line in r.stdout.splitlines()) == 3


def test_diff_corrupt_manifest_is_bad_input(work):
    spec, out = built(work)
    doc = json.loads((out / "arm.manifest.json").read_text(encoding="utf-8"))
    doc["kernels"][0]["formulas"]["s"] = "a.s*b.s + + 2"
    (out / "arm.manifest.json").write_text(json.dumps(doc), encoding="utf-8")
    r = run("diff", spec.name, "--out", out)
    assert r.exit_code == 2
    assert "arm.manifest.json: kernels[0].formulas.s: cannot read the term" in r.stderr


def test_diff_usage_errors_exit_2(work):
    write(work / "a.toml", ARM)
    assert run("diff", "a.toml", "a.toml", "--out", "x").exit_code == 2
    assert run("diff", "a.toml", "a.toml", "a.toml").exit_code == 2


VERSORS = DRONE.replace("[targets.python]", """[[kernels]]
op = "inverse"
args = ["rotor"]
name = "undo"

[[kernels]]
op = "sandwich_matrix"
args = ["rotor", "vec"]
name = "rotation_matrix"

[targets.python]""")


def test_diff_closed_forms_and_matrix_entries_round_trip(work):
    """Closed forms (inverse) and matrix entries (sandwich_matrix) survive the manifest: a spec
    diffed against its own build reports nothing."""
    spec, out = built(work, VERSORS.format(blades='blades = ["e31"]'), "drone.toml")
    r = run("diff", spec.name, "--out", out)
    assert r.exit_code == 0 and r.output == ""


def test_diff_closed_form_changes_with_the_metric_not_with_a_rename(work):
    """R ~R of a rotor is sum_B a_B^2 (B ~B), and e_ij ~e_ij = e_i e_j e_j e_i = m_i m_j (common
    practice, no source): with e3 squaring to -1 the norm in `undo` becomes
    a.s^2 + a.e12^2 - a.e13^2 - a.e23^2.  Renaming e13 to e31 flips input and output together, so
    the closed form is the same expression in the new names: no change reported."""
    write(work / "old.toml", VERSORS.format(blades=""))
    write(work / "renamed.toml", VERSORS.format(blades='blades = ["e31"]'))
    write(work / "minkowski.toml", VERSORS.format(blades="").replace("[1, 1, 1]", "[1, 1, -1]"))
    code, doc = diff_json("old.toml", "renamed.toml")
    assert code == 1 and "undo" not in [k["name"] for k in doc["kernels"]]
    code, doc = diff_json("old.toml", "minkowski.toml")
    undo = {c["component"]: c for c in kernel_entry(doc, "undo")["components"]}
    assert "a.s*a.s + a.e12*a.e12 - a.e13*a.e13 - a.e23*a.e23" in undo["s"]["new_formula"]
    assert "a.s*a.s + a.e12*a.e12 + a.e13*a.e13 + a.e23*a.e23" in undo["s"]["old_formula"]


def test_formula_parser_reads_canonical_text():
    # meaning of the canonical text (DESIGN section 5): signs between terms, rational coefficients
    terms = diff_mod.parse_formula("-a.s*b.e1 + 1/2*a.e1*b.s - 3*a.e12*a.e12", pytest.fail)
    assert terms == [(Fraction(-1), (("a", "s"), ("b", "e1"))),
                     (Fraction(1, 2), (("a", "e1"), ("b", "s"))),
                     (Fraction(-3), (("a", "e12"), ("a", "e12")))]
    assert diff_mod.parse_formula("0", pytest.fail) == []


def test_colour_only_on_a_terminal_without_no_color():
    class Tty(io.StringIO):
        def isatty(self):
            return True
    assert use_colour(Tty(), {}) is True
    assert use_colour(Tty(), {"NO_COLOR": "1"}) is False
    assert use_colour(io.StringIO(), {}) is False
    ascii_stream = io.TextIOWrapper(io.BytesIO(), encoding="ascii")
    assert dot_for(ascii_stream) == "*"


# ------------------------------------------------------------------------------ show, table
def test_show_text_latex_markdown(work):
    write(work / "drone.toml", DRONE.format(blades=""))
    # (a ^ b)_12 = a1 b2 - a2 b1 (the cross-product components; common practice, no source);
    # three such components: 6 multiplies, 3 adds (DESIGN section 5 counting rule)
    r = run("show", "drone.toml", "wedge")
    assert r.exit_code == 0, r.output
    assert "  e12 = a.e1*b.e2 - a.e2*b.e1" in r.stdout.splitlines()
    assert "cost: 6 mul, 3 add" in r.stdout and "compose" not in r.stdout
    latex = run("show", "drone.toml", "wedge", "--latex").stdout
    assert r"\begin{align*}" in latex
    assert r"\mathrm{wedge}_{e_{12}} &= a_{e_{1}} b_{e_{2}} - a_{e_{2}} b_{e_{1}}" in latex
    md = run("show", "drone.toml", "--markdown").stdout
    assert "| `e12` | `a.e1*b.e2 - a.e2*b.e1` |" in md and "### `compose`" in md


def test_show_unknown_kernel_exits_2(work):
    write(work / "drone.toml", DRONE.format(blades=""))
    r = run("show", "drone.toml", "wegde")
    assert r.exit_code == 2 and "no kernel named 'wegde'" in r.stderr


PAULI = [np.array([[0, 1], [1, 0]], complex), np.array([[0, -1j], [1j, 0]]),
         np.array([[1, 0], [0, -1]], complex)]


def pauli_matrix(factors: list[int]) -> np.ndarray:
    out = np.eye(2, dtype=complex)
    for i in factors:
        out = out @ PAULI[i]
    return out


def parse_cell(cell: str, names: dict) -> np.ndarray:
    """'0', '-1', 'e12', '-e31', '2*e3' (no sums in an orthogonal algebra) as a Pauli matrix."""
    if cell == "0":
        return np.zeros((2, 2), complex)
    sign = -1 if cell.startswith("-") else 1
    body = cell.lstrip("-")
    coef, _, name = body.rpartition("*") if "*" in body else ("1", "", body)
    if name.isdigit():
        return sign * int(name) * np.eye(2)
    return sign * float(Fraction(coef)) * pauli_matrix(names[name])


def test_table_matches_pauli_matrices(work):
    """Every cell of the Cl(3,0) table, with e31 named e3 e1, against sigma matrix products:
    the Pauli matrices represent Cl(3,0) (e_i -> sigma_i; Pauli 1927, common practice)."""
    write(work / "drone.toml", DRONE.format(blades='blades = ["e31"]'))
    r = run("table", "drone.toml")
    assert r.exit_code == 0, r.output
    rows = [line.split() for line in r.stdout.splitlines()[3:]]
    header = r.stdout.splitlines()[1].split()[1:]
    names = {"s": [], "e1": [0], "e2": [1], "e3": [2], "e12": [0, 1], "e31": [2, 0],
             "e23": [1, 2], "e123": [0, 1, 2]}
    assert sorted(header) == sorted(names) and len(rows) == 8
    for row in rows:
        for col, cell in zip(header, row[1:]):
            want = pauli_matrix(names[row[0]]) @ pauli_matrix(names[col])
            np.testing.assert_allclose(parse_cell(cell, names), want, atol=1e-12)


def test_table_outer_product_and_limits(work):
    write(work / "drone.toml", DRONE.format(blades=""))
    lines = run("table", "drone.toml", "--op", "outer").stdout.splitlines()
    header = lines[1].split()
    e1 = dict(zip(header[1:], next(line.split() for line in lines[3:] if line.split()[0] == "e1")[1:]))
    # e1 ^ e1 = 0, e1 ^ e2 = e12, e1 ^ e23 = e123: the grade r+s part (Dorst, The Inner Products
    # of Geometric Algebra, 2002, as DESIGN section 3 quotes it)
    assert (e1["e1"], e1["e2"], e1["e23"], e1["e12"]) == ("0", "e12", "e123", "0")
    big = DRONE.format(blades="").replace('["e1", "e2", "e3"]', '["e1", "e2", "e3", "e4", "e5", "e6", "e7"]')
    write(work / "big.toml", big.replace("[1, 1, 1]", "[1, 1, 1, 1, 1, 1, 1]"))
    r = run("table", "big.toml")
    assert r.exit_code == 2 and "limited to n <= 6" in r.stderr
    assert run("table", "drone.toml", "--op", "reverse").exit_code == 2


def test_table_png_needs_matplotlib(work, monkeypatch):
    write(work / "drone.toml", DRONE.format(blades=""))
    monkeypatch.setitem(sys.modules, "matplotlib", None)       # import matplotlib -> ImportError
    r = run("table", "drone.toml", "--png", "t.png")
    assert r.exit_code == 2 and "needs matplotlib" in r.stderr
    assert not (work / "t.png").exists()


def test_table_png_is_a_png_of_the_documented_size(work):
    if os.environ.get("CI") == "true":
        import matplotlib  # noqa: F401  (CI installs the plot extra: a missing one must fail)
    else:
        pytest.importorskip("matplotlib")
    from generator.show import CELL_PX
    write(work / "drone.toml", DRONE.format(blades=""))
    r = run("table", "drone.toml", "--png", "t.png")
    assert r.exit_code == 0, r.output
    data = (work / "t.png").read_bytes()
    # PNG signature and IHDR chunk first (ISO/IEC 15948:2004, 5.2 and 11.2.2)
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    width, height = struct.unpack(">II", data[16:24])
    blades = 2 ** 3                                           # sum of C(3, k) (binomial theorem)
    assert width == height == (blades + 1) * CELL_PX


# ------------------------------------------------------------------------------------- init
@pytest.mark.parametrize("signature, basis, metric", [
    ("3,0,1", ["e0", "e1", "e2", "e3"], [0, 1, 1, 1]),
    ("0,1", ["e1"], [-1]),
    ("1,3,0", ["e1", "e2", "e3", "e4"], [1, -1, -1, -1]),
    ("0,0,2", ["e0", "e1"], [0, 0]),
    ("1,0,0", ["e1"], [1]),
])
def test_init_writes_a_spec_that_builds(work, signature, basis, metric):
    import tomllib
    r = run("init", "rig", "--signature", signature, "--out", "specs/rig.toml")
    assert r.exit_code == 0, r.output
    doc = tomllib.loads((work / "specs" / "rig.toml").read_text(encoding="utf-8"))
    # Cl(P,Q,R): P squares +1, Q squares -1, R squares 0 (common practice, no source)
    assert doc["algebra"]["basis"] == basis and doc["algebra"]["metric"] == metric
    b = run("build", "specs/rig.toml", "--out", "gen", "--quiet")
    assert b.exit_code == 0, b.output
    assert (work / "gen" / "rig.py").is_file()


def test_init_refuses_to_overwrite_and_bad_names(work):
    assert run("init", "rig", "--signature", "3,0").exit_code == 0
    first = (work / "rig.toml").read_bytes()
    r = run("init", "rig", "--signature", "2,0")
    assert r.exit_code == 2 and "already exists" in r.stderr
    assert (work / "rig.toml").read_bytes() == first
    assert run("init", "rig", "--signature", "2,0", "--force").exit_code == 0
    assert (work / "rig.toml").read_bytes() != first
    for name in ("9lives", "int", "arm-2"):
        r = run("init", name, "--signature", "3,0")
        assert r.exit_code == 2 and "NAME" in r.stderr
    for sig in ("3", "3,x", "0,0,0", "20,0"):
        assert run("init", "rig2", "--signature", sig).exit_code == 2
    assert not (work / "rig2.toml").exists()


# ------------------------------------------------------------------ build: json and progress
def test_build_json_summary_and_noop_rebuild(work):
    write(work / "arm.toml", ARM)
    r = run("build", "arm.toml", "--out", "out", "--json")
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    entry = doc["builds"][0]
    assert entry["algebra"] == "arm" and set(entry["files"].values()) == {"written"}
    wedge = next(k for k in entry["kernels"] if k["name"] == "wedge")
    # six components a_i b_j - a_j b_i: 12 multiplies, 6 adds (DESIGN section 5 counting rule)
    assert wedge["counts"] == {"mul": 12, "add": 6}
    again = json.loads(run("build", "arm.toml", "--out", "out", "--json").stdout)
    assert set(again["builds"][0]["files"].values()) == {"unchanged"}


class FakeTty(io.StringIO):
    def isatty(self):
        return True


def test_progress_bar_only_on_a_terminal_after_a_second():
    now = [0.0]
    clock = lambda: now[0]   # noqa: E731  (a fake clock: no waiting, no timed assert)
    shown = FakeTty()
    with Progress(stream=shown, env={}, clock=clock) as p:
        p(1, 4, "arm.toml")                 # before the delay: nothing
        assert shown.getvalue() == ""
        now[0] = 1.5
        p(2, 4, "arm.toml")
        p(4, 4, "arm.toml")
    assert "arm.toml" in shown.getvalue()
    for stream, env in ((io.StringIO(), {}), (FakeTty(), {"CI": "true"})):
        with Progress(stream=stream, env=env, clock=clock, delay=0) as p:
            p(1, 1, "arm.toml")
        assert stream.getvalue() == ""
    assert not interactive(io.StringIO(), {}) and interactive(FakeTty(), {})


# ------------------------------------------------------------ determinism and atomic writes
def test_builds_are_byte_identical_under_any_hash_seed(work):
    spec = DRONE.format(blades='blades = ["e31", "e312"]').replace(
        "[targets.python]", '[[kernels]]\nop = "commutator"\nargs = ["full", "vec"]\n\n'
                            '[[kernels]]\nop = "add"\nargs = ["rotor", "vec"]\n\n[targets.python]')
    write(work / "drone.toml", spec)
    outputs = []
    for seed in ("0", "1", "4242", "random"):
        env = dict(os.environ, PYTHONHASHSEED=seed)
        subprocess.run([sys.executable, "-c", "from generator.cli import main; main()", "build",
                        "drone.toml", "--out", f"out_{seed}", "--quiet"], cwd=work, env=env,
                       check=True)
        folder = work / f"out_{seed}"
        outputs.append({p.name: p.read_bytes() for p in sorted(folder.iterdir())})
    assert len(outputs[0]) == 2 and all(o == outputs[0] for o in outputs[1:])


def test_noop_rebuild_keeps_mtimes(work):
    spec, out = built(work)
    past = 1_000_000_000_000_000_000          # 2001-09-09 in ns: far from "now"
    for p in out.iterdir():
        os.utime(p, ns=(past, past))
    r = run("build", spec.name, "--out", out)
    assert r.exit_code == 0 and "written" not in r.stdout
    assert all(p.stat().st_mtime_ns == past for p in out.iterdir())


def test_failing_spec_leaves_previous_output_untouched(work):
    spec, out = built(work)
    before = {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in out.iterdir()}
    # the last kernel fails during derivation: a vector wedged with the pseudoscalar is zero
    bad = ARM.replace("[targets.python]", '[types.ps]\ngrades = [4]\n\n[[kernels]]\nop = "outer"\n'
                                          'args = ["vec", "ps"]\n\n[targets.python]')
    write(spec, bad)
    r = run("build", spec.name, "--out", out)
    assert r.exit_code == 2 and "structurally zero" in r.stderr and "Traceback" not in r.output
    assert {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in out.iterdir()} == before
    # several specs: one bad one means nothing is written for the good one either
    write(work / "good.toml", ARM.replace('name = "arm"', 'name = "good"'))
    assert run("build", "good.toml", spec.name, "--out", "fresh").exit_code == 2
    assert not (work / "fresh").exists()


# --- verify at the largest dimensions a spec allows ---------------------------------------------

def wide_spec(n: int, kernels: str) -> str:
    basis = ", ".join(f'"e{i}"' for i in range(1, n + 1))
    return f"""
# test scenario: a {n}-dimensional field of a toy swarm simulator
[algebra]
name = "swarm{n}"
basis = [{basis}]
metric = [{", ".join(["1"] * (n - 1) + ["-1"])}]
[types.vec]
grades = [1]
[types.rotor]
grades = [0, 2]
{kernels}
[targets.python]
"""


def test_verify_serves_sixteen_dimensions(tmp_path):
    # the reference used to build a 2^n x 2^n x 2^n tensor (n = 11: 64 GiB, a traceback); its
    # float path now applies the products to vectors, so verify runs at spec.MAX_DIMENSION
    spec = tmp_path / "swarm.toml"
    spec.write_text(wide_spec(16, '[[kernels]]\nop = "geometric"\nargs = ["vec", "vec"]\n'
                                  'name = "pair"\nresult = "rotor"\n'))
    r = CliRunner().invoke(main, ["verify", str(spec), "--out", str(tmp_path / "out"),
                                  "--samples", "8"])
    assert r.exit_code == 0, r.output
    assert "pair" in r.output and "MISMATCH" not in r.output


def test_verify_says_which_kernels_the_reference_cannot_check(tmp_path):
    # inverse needs the reference's 2^n x 2^n left-multiplication matrix, built up to n = 10:
    # above that verify reports the kernel NOT CHECKED and exits 1, without a traceback
    spec = tmp_path / "swarm.toml"
    spec.write_text(wide_spec(11, '[[kernels]]\nop = "inverse"\nargs = ["vec"]\nname = "undo"\n'
                                  '[[kernels]]\nop = "outer"\nargs = ["vec", "vec"]\n'
                                  'name = "span"\n'))
    r = CliRunner().invoke(main, ["verify", str(spec), "--out", str(tmp_path / "out"),
                                  "--samples", "4"])
    assert r.exit_code == 1, r.output
    assert r.exception is None or isinstance(r.exception, SystemExit)
    assert "NOT CHECKED" in r.output and "n = 10" in r.output and "span" in r.output
    assert "1 kernel(s) could not be checked" in r.stderr
