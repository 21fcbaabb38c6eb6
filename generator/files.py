"""Output directories and atomic, minimal file writes.

A spec's `[output] dir` is relative to the spec and must resolve (symbolic links included) inside
the current working directory; `--out` on the command line overrides it and may point anywhere.
Files are written to a temporary file in the same directory and renamed over the old one, and a
file whose content is unchanged is not touched at all, so its mtime survives a no-op rebuild.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path, PurePosixPath

from .spec import Spec


def output_dir(spec: Spec, cli_out: str | None, cwd: Path | None = None) -> Path:
    if cli_out is not None:
        return Path(cli_out)
    cwd = (cwd or Path.cwd()).resolve()
    if spec.output_dir is None:
        return cwd / "generated" / spec.name
    raw = spec.output_dir
    if not raw or os.path.isabs(raw) or PurePosixPath(raw.replace("\\", "/")).is_absolute():
        raise spec.error("output.dir", f"{raw!r} must be a relative path (it is resolved against "
                                       "the spec's directory); use --out to write elsewhere")
    target = (spec.path.parent / raw).resolve()
    if target != cwd and cwd not in target.parents:
        raise spec.error("output.dir", f"{raw!r} resolves to {target}, outside the current "
                                       f"directory {cwd}; a spec may only write below the directory "
                                       "bladesmith runs in (pass --out to choose a directory explicitly)")
    return target


def display_path(path: Path, cwd: Path | None = None) -> str:
    """A machine-independent spelling of a path: relative to cwd when inside it, else its name."""
    cwd = (cwd or Path.cwd()).resolve()
    full = path.resolve()
    try:
        return full.relative_to(cwd).as_posix()
    except ValueError:
        return full.name


def write_files(directory: Path, files: dict[str, str]) -> list[tuple[str, str]]:
    """Write each file atomically; returns (name, "written" | "unchanged") in name order."""
    directory.mkdir(parents=True, exist_ok=True)
    status = []
    for name in sorted(files):
        if "/" in name or "\\" in name or name.startswith("."):
            raise ValueError(f"refusing to write {name!r}: not a plain file name")
        status.append((name, write_one(directory / name, files[name].encode("utf-8"))))
    return status


def write_one(path: Path, data: bytes) -> str:
    try:
        if path.read_bytes() == data:
            return "unchanged"
    except OSError:
        pass
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return "written"
