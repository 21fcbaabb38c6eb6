"""Output directories and atomic, minimal file writes.

A spec's `[output] dir` is relative to the spec and must resolve (symbolic links included) inside
the current working directory; `--out` on the command line overrides it and may point anywhere.
Files are written to a temporary file in the same directory and renamed over the old one, and a
file whose content is unchanged is not touched at all, so its mtime survives a no-op rebuild.
Writers of one directory take turns (an exclusive lock on the directory), so two concurrent
builds leave the files of one of them, never a mix that disagrees with the manifest.
"""
from __future__ import annotations

import os
import re
import tempfile
from contextlib import contextmanager
from pathlib import Path, PurePosixPath

from .names import shown
from .spec import Spec

try:
    import fcntl
except ImportError:          # not POSIX: no cross-process lock, each file is still atomic
    fcntl = None

PLAIN_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_]*(\.[A-Za-z0-9_]+)*\Z")


def output_dir(spec: Spec, cli_out: str | None, cwd: Path | None = None) -> Path:
    if cli_out is not None:
        return Path(cli_out)
    cwd = (cwd or Path.cwd()).resolve()
    if spec.output_dir is None:
        return cwd / "generated" / spec.name
    problem = dir_problem(spec.output_dir)
    if problem:
        raise spec.error("output.dir", f"{shown(spec.output_dir)} {problem}")
    try:
        target = (spec.path.parent / spec.output_dir).resolve()
    except (OSError, RuntimeError) as exc:     # a symbolic link loop (RuntimeError before 3.13)
        raise spec.error("output.dir", f"{shown(spec.output_dir)} cannot be resolved: {exc}") from None
    if target != cwd and cwd not in target.parents:
        raise spec.error("output.dir", f"{shown(spec.output_dir)} resolves to {shown(str(target))}, "
                                       f"outside the current directory {shown(str(cwd))} (through "
                                       "'..' or a symbolic link); a spec may only write below the "
                                       "directory bladesmith runs in: pass --out to choose one")
    return target


def dir_problem(raw: str) -> str | None:
    """Why a spec's `[output] dir` string is refused before it is resolved, or None."""
    checks = (
        (not raw, "is empty: remove the key to write to generated/<name>"),
        ("\0" in raw, "contains a NUL character"),
        ("\\" in raw, "contains a backslash: separate directories with '/'"),
        (os.path.isabs(raw) or PurePosixPath(raw).is_absolute() or re.match(r"[A-Za-z]:", raw),
         "must be a relative path (it is resolved against the spec's directory); "
         "use --out to write elsewhere"),
    )
    return next((message for bad, message in checks if bad), None)


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
    for name in files:
        if not PLAIN_NAME.match(name):
            raise ValueError(f"refusing to write {name!r}: not a plain file name")
    directory.mkdir(parents=True, exist_ok=True)
    with locked(directory):
        return [(name, write_one(directory / name, files[name].encode("utf-8")))
                for name in sorted(files)]


@contextmanager
def locked(directory: Path):
    """Hold an exclusive lock on `directory` (POSIX flock on the directory itself, no lock file)."""
    if fcntl is None:
        yield
        return
    fd = os.open(directory, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)


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
