"""The README's promises: the quick start is what CI runs, and generated/ is current."""
from __future__ import annotations

import re

import pytest

from generator import pipeline, spec as spec_mod

from helpers import ROOT, SPECS


def quick_start_commands() -> list[str]:
    readme = (ROOT / "README.md").read_text()
    section = readme.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```sh\n(.+?)\n```", section)


def test_quick_start_has_two_commands_and_ci_runs_the_test_one():
    commands = quick_start_commands()
    assert len(commands) == 2
    install_and_build, install_and_test = commands
    assert "bladesmith build specs/" in install_and_build
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert install_and_test in ci


@pytest.mark.parametrize("path", SPECS, ids=[p.stem for p in SPECS])
def test_generated_output_is_current(path, monkeypatch):
    # CI regenerates generated/ in memory and fails if anything differs from what is committed
    monkeypatch.chdir(ROOT)
    spec = spec_mod.load(path.relative_to(ROOT))
    files = pipeline.render(pipeline.derive_module(spec))
    out = ROOT / "generated" / spec.name
    for name, text in files.items():
        committed = out / name
        assert committed.exists(), f"{committed} is missing: run `bladesmith build specs/*.toml`"
        assert committed.read_text() == text, f"{committed} is stale: run `bladesmith build specs/*.toml`"
    stray = {p.name for p in out.iterdir() if p.is_file()} - set(files)
    assert not stray, f"files in {out} that no build writes: {sorted(stray)}"


def test_first_spec_from_the_readme_builds_and_verifies(tmp_path):
    # a spec written from the README alone: its "A first spec" example, as a new user copies it
    from click.testing import CliRunner
    from generator.cli import main
    readme = (ROOT / "README.md").read_text()
    section = readme.split("## A first spec", 1)[1].split("\n## ", 1)[0]
    toml = re.search(r"```toml\n(.+?)\n```", section, re.S).group(1)
    (tmp_path / "mine.toml").write_text(toml)
    result = CliRunner().invoke(main, ["verify", str(tmp_path / "mine.toml"), "--out",
                                       str(tmp_path / "out"), "--samples", "16"])
    assert result.exit_code == 0, result.output
    assert "MISMATCH" not in result.output and "compose" in result.output
