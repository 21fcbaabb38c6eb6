"""The `bladesmith` command line: parse, call the stages, print, map errors to exit codes.

Exit codes: 0 success; 1 a verification or check found a difference; 2 a bad spec or bad usage,
reported as `Error: FILE:LINE: key.path: message` on stderr with no traceback.
"""
from __future__ import annotations

import functools
import sys
from pathlib import Path

import click

from . import __version__, pipeline
from .spec import SpecError

EXIT_DIFFERENT, EXIT_BAD_INPUT = 1, 2


def fail(message: str) -> None:
    click.echo(f"Error: {message}", err=True)
    sys.exit(EXIT_BAD_INPUT)


def spec_errors(fn):
    """Turn a SpecError (or an unreadable output directory) into `Error: ...` and exit 2."""
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except SpecError as exc:
            fail(str(exc))
        except OSError as exc:
            fail(f"{exc.filename or ''}: {exc.strerror or exc}")
    return wrapper


SPECS = click.argument("specs", nargs=-1, required=True,
                       type=click.Path(dir_okay=False, path_type=Path))
OUT = click.option("--out", "out", type=click.Path(file_okay=False), default=None,
                   help="Output directory (overrides the spec's [output] dir; may be anywhere).")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="bladesmith")
def main():
    """bladesmith: exact, sparse geometric algebra kernels from a TOML spec.

    A spec names an algebra (basis and metric), element types and the products you need;
    bladesmith derives the formulas exactly, prunes structural zeros and writes Python, numba
    and C99 kernels plus a manifest.  Start with `bladesmith build specs/drone.toml`.
    """


def build_all(specs, out) -> list[pipeline.Build]:
    """Derive every spec before anything is written, so one bad spec writes nothing."""
    builds = [pipeline.build(path, out) for path in specs]
    seen: dict[Path, str] = {}
    for b in builds:
        target = (b.out_dir / b.manifest_name).resolve()
        if target in seen:
            fail(f"{b.spec.display}: algebra {b.module.name!r} would overwrite the output of "
                 f"{seen[target]} in {b.out_dir}; give the algebras different names")
        seen[target] = b.spec.display
    return builds


@main.command()
@SPECS
@OUT
@click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
@spec_errors
def build(specs, out, quiet):
    """Derive the kernels of each SPEC and write the emitted files and the manifest.

    Prints one row per kernel (arguments -> result, multiplies, adds) and whether each file was
    written or left unchanged (unchanged files keep their modification time).
    """
    for b in build_all(specs, out):
        status = pipeline.write(b)
        if not quiet:
            print_build(b, status)


def print_build(b: pipeline.Build, status) -> None:
    click.echo(f"{b.spec.display}: algebra {b.module.name} -> {b.out_dir}")
    rows = [(k.name, f"{', '.join(k.args)} -> {k.result}", str(k.program.counts.mul),
             str(k.program.counts.add)) for k in b.module.kernels]
    click.echo(table(("kernel", "args -> result", "mul", "add"), rows))
    for name, state in status:
        click.echo(f"  {state:9} {name}")


def table(header, rows) -> str:
    widths = [max(len(str(x)) for x in col) for col in zip(header, *rows)]
    lines = ["  " + "  ".join(str(x).ljust(w) for x, w in zip(r, widths)).rstrip()
             for r in [header] + list(rows)]
    lines.insert(1, "  " + "  ".join("-" * w for w in widths))
    return "\n".join(lines)


@main.command()
@SPECS
@OUT
@click.option("--samples", default=64, show_default=True, type=click.IntRange(1, 100000),
              help="Random inputs per kernel.")
@click.option("--seed", default=20261202, show_default=True, type=int, help="Random seed.")
@spec_errors
def verify(specs, out, samples, seed):
    """Check every emitted kernel of each SPEC against the independent dense reference.

    Builds the output first (writing only files whose content changed), then imports or compiles
    each target and compares it with the reference on seeded random inputs.  Exit 1 on any
    mismatch.
    """
    from .verify import verify as run_verify
    bad = 0
    for b in build_all(specs, out):
        pipeline.write(b)
        rows = run_verify(b.module, b.out_dir, samples, seed)
        click.echo(f"{b.spec.display}: {len(rows)} checks against the dense reference")
        click.echo(table(("kernel", "target", "samples", "max abs error", "tolerance", "status"),
                         [(r.kernel, r.target, r.samples, f"{r.max_error:.3g}", f"{r.tolerance:.3g}",
                           "ok" if r.ok else "MISMATCH") for r in rows]))
        bad += sum(not r.ok for r in rows)
    if bad:
        click.echo(f"{bad} check(s) disagree with the reference", err=True)
        sys.exit(EXIT_DIFFERENT)
