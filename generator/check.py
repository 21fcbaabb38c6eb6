"""`bladesmith check`: are the emitted files and the manifest what the spec produces now?

The manifest records the spec's sha256, the tool version and the sha256 of every file the build
wrote.  When the spec and the tool are unchanged and every file still has its recorded hash, the
output is current and nothing is derived (the fast path).  Otherwise the spec is built in memory
(`pipeline.derive_module` and `pipeline.render`, nothing written) and compared file by file:

- missing      the build would create the file;
- hand-edited  the file's hash differs from the one the manifest recorded, so someone changed it
               after it was generated (a build will overwrite it);
- stale        the file is as generated, but the spec (or the tool) now produces something else;
- obsolete     the manifest lists a file the spec no longer generates (delete it).

The fast path trusts the manifest's own body (formulas, counts); `--full` always rebuilds.
"""
from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path

from . import __version__, pipeline, spec as spec_mod
from .files import display_path, output_dir

STATES = ("missing", "hand-edited", "stale", "obsolete")


@dataclass(frozen=True)
class Finding:
    name: str                   # file name inside the output directory
    state: str                  # one of STATES


@dataclass(frozen=True)
class Result:
    spec: spec_mod.Spec
    out_dir: Path
    findings: tuple[Finding, ...]
    fast: bool                  # decided without deriving

    @property
    def current(self) -> bool:
        return not self.findings


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def plain_name(name: object) -> bool:
    """A manifest entry that can name a generated file (never a path out of the directory)."""
    return (isinstance(name, str) and bool(name) and "/" not in name and "\\" not in name
            and not name.startswith(".") and "\0" not in name)


def read_recorded(path: Path) -> dict | None:
    """The manifest's JSON, or None when it is missing or not a manifest."""
    try:
        doc = json.loads(path.read_bytes().decode("utf-8"))
    except (OSError, ValueError):
        return None
    ok = (isinstance(doc, dict) and isinstance(doc.get("spec"), dict)
          and isinstance(doc.get("files"), dict))
    return doc if ok else None


def recorded_files(doc: dict | None) -> dict[str, str]:
    if doc is None:
        return {}
    return {k: v for k, v in doc["files"].items() if plain_name(k) and isinstance(v, str)}


def disk_hash(path: Path) -> str | None:
    try:
        return sha256(path.read_bytes())
    except FileNotFoundError:
        return None


def fast_current(spec: spec_mod.Spec, out: Path, doc: dict | None) -> bool:
    """Spec, tool and every recorded file unchanged: current, without deriving anything."""
    if doc is None or doc.get("version") != __version__:
        return False
    if doc["spec"].get("sha256") != spec.digest or doc["spec"].get("path") != display_path(spec.path):
        return False
    files = recorded_files(doc)
    return bool(files) and all(disk_hash(out / n) == h for n, h in files.items())


def classify(name: str, want: str | None, have: str | None, recorded: str | None) -> str | None:
    """The state of one file from its wanted, on-disk and recorded hashes (None: current)."""
    if want is None:
        return "obsolete" if have is not None and recorded is not None else None
    if have is None:
        return "missing"
    if have == want:
        return None
    return "hand-edited" if recorded is not None and have != recorded else "stale"


def compare(out: Path, files: dict[str, str], doc: dict | None) -> tuple[Finding, ...]:
    recorded = recorded_files(doc)
    found = []
    for name in sorted(set(files) | set(recorded)):
        want = sha256(files[name].encode("utf-8")) if name in files else None
        state = classify(name, want, disk_hash(out / name), recorded.get(name))
        if state:
            found.append(Finding(name, state))
    return tuple(found)


def check(path: str | Path, cli_out: str | None = None, full: bool = False) -> Result:
    """Check one spec's output directory (raises SpecError for a bad spec)."""
    spec = spec_mod.load(path)
    out = output_dir(spec, cli_out)
    doc = read_recorded(out / f"{spec.name}.manifest.json")
    if not full and fast_current(spec, out, doc):
        return Result(spec, out, (), fast=True)
    files = pipeline.render(pipeline.derive_module(spec))
    return Result(spec, out, compare(out, files, doc), fast=False)


HINTS = {"hand-edited": "hand edits are overwritten by a build; change the spec instead",
         "obsolete": "a build does not delete obsolete files; remove them by hand"}


def report(r: Result, cli_out: str | None = None) -> list[str]:
    """Human-readable lines for one result."""
    if r.current:
        return [f"{r.spec.display}: current ({r.out_dir})"]
    lines = [f"{r.spec.display}: {len(r.findings)} file(s) out of date in {r.out_dir}"]
    lines += [f"  {f.state:11}  {f.name}" for f in r.findings]
    states = {f.state for f in r.findings}
    lines += [f"  ({HINTS[s]})" for s in STATES if s in states and s in HINTS]
    again = f" --out {cli_out}" if cli_out else ""
    lines.append(f"  regenerate with: bladesmith build {r.spec.display}{again}")
    return lines
