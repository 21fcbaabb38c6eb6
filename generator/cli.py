"""The `bladesmith` command line: parse, call the stages, print, map errors to exit codes.

Exit codes: 0 success; 1 a verification or check found a difference; 2 a bad spec or bad usage,
reported as `Error: FILE:LINE: key.path: message` on stderr with no traceback.
"""
from __future__ import annotations

import functools
import sys
from pathlib import Path

import click

from . import __version__, budget, pipeline
from . import check as check_mod, diff as diff_mod, diffview, show as show_mod, starter, summary
from .progress import Progress
from .names import printable
from .spec import SpecError

EXIT_DIFFERENT, EXIT_BAD_INPUT = 1, 2


def fail(message: str) -> None:
    click.echo(f"Error: {printable(message)}", err=True)
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
MAX_TERMS = click.option(
    "--max-terms", type=click.IntRange(min=1), default=None, expose_value=False,
    callback=lambda ctx, param, value: budget.set_limit(value),
    help=f"Refuse a spec whose estimated derivation exceeds this many terms "
         f"(default {budget.DEFAULT_MAX_TERMS:,}, about half a minute).")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="bladesmith")
def main():
    """bladesmith: exact, sparse geometric algebra kernels from a TOML spec.

    A spec names an algebra (basis and metric), element types and the products you need;
    bladesmith derives the formulas exactly, prunes structural zeros and writes Python, numba
    and C99 kernels plus a manifest.  Start with `bladesmith build specs/drone.toml`.
    """


def build_all(specs, out, progress=None) -> list[pipeline.Build]:
    """Derive every spec before anything is written, so one bad spec writes nothing."""
    builds = [pipeline.build(path, out, progress=progress) for path in specs]
    seen: dict[Path, str] = {}
    for b in builds:
        target = (b.out_dir / b.manifest_name).resolve()
        if target in seen:
            fail(str(b.spec.error("algebra.name", f"algebra {b.module.name!r} would overwrite the "
                                                   f"output of {seen[target]} in {b.out_dir}; give "
                                                   "the algebras different names")))
        seen[target] = b.spec.display
    return builds


@main.command()
@SPECS
@OUT
@MAX_TERMS
@click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
@click.option("--json", "as_json", is_flag=True,
              help="Print a JSON summary (kernels, counts, files written) instead of tables.")
@spec_errors
def build(specs, out, quiet, as_json):
    """Derive the kernels of each SPEC and write the emitted files and the manifest.

    Prints one row per kernel (arguments -> result, multiplies, adds) and whether each file was
    written or left unchanged (unchanged files keep their modification time).  A build that runs
    longer than about a second shows a progress bar on a terminal (never in pipes or CI).
    """
    with Progress(enabled=not (quiet or as_json)) as progress:
        builds = build_all(specs, out, progress)
    results = [(b, pipeline.write(b)) for b in builds]
    if as_json:
        click.echo(summary.build_json(results))
    elif not quiet:
        for b, status in results:
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
@MAX_TERMS
@click.option("--samples", default=64, show_default=True, type=click.IntRange(1, 100000),
              help="Random inputs per kernel.")
@click.option("--seed", default=20261202, show_default=True, type=int, help="Random seed.")
@spec_errors
def verify(specs, out, samples, seed):
    """Check every emitted kernel of each SPEC against the independent dense reference.

    Builds the output first (writing only files whose content changed), then imports or compiles
    each target and compares it with the reference on seeded random inputs.  Exit 1 on any
    mismatch, or when the reference cannot evaluate a kernel (inverse and exp need a 2^n x 2^n
    matrix, built up to n = 10).
    """
    from .verify import verify as run_verify
    bad = unchecked = 0
    for b in build_all(specs, out):
        pipeline.write(b)
        rows = run_verify(b.module, b.out_dir, samples, seed)
        click.echo(f"{b.spec.display}: {len(rows)} checks against the dense reference")
        notes = list(dict.fromkeys(r.note for r in rows if r.note))
        mark = {n: f"[{i + 1}]" for i, n in enumerate(notes)}
        click.echo(table(("kernel", "target", "samples", "max abs error", "tolerance", "status",
                          "note"),
                         [(r.kernel, r.target, r.samples,
                           f"{r.max_error:.3g}" if r.checked else "-",
                           f"{r.tolerance:.3g}" if r.checked else "-",
                           "ok" if r.ok else ("MISMATCH" if r.checked else "NOT CHECKED"),
                           mark.get(r.note, "")) for r in rows]))
        for n in notes:
            click.echo(f"  {mark[n]} {n}")
        bad += sum(r.checked and not r.ok for r in rows)
        unchecked += sum(not r.checked for r in rows)
    if bad:
        click.echo(f"{bad} check(s) disagree with the reference", err=True)
    if unchecked:
        click.echo(f"{unchecked} kernel(s) could not be checked against the reference", err=True)
    if bad or unchecked:
        sys.exit(EXIT_DIFFERENT)


@main.command()
@SPECS
@OUT
@MAX_TERMS
@click.option("--full", is_flag=True,
              help="Always rebuild in memory and compare, even when the hashes say current.")
@spec_errors
def check(specs, out, full):
    """Exit 0 when the output of every SPEC is what a build would write now.

    Otherwise exit 1 and list each missing, hand-edited (its sha256 differs from the manifest's),
    stale or obsolete file.  When the spec, the tool version and every file's hash match the
    manifest, nothing is derived.
    """
    results = [check_mod.check(path, out, full) for path in specs]
    for r in results:
        click.echo("\n".join(check_mod.report(r, out)))
    if not all(r.current for r in results):
        sys.exit(EXIT_DIFFERENT)


@main.command()
@click.argument("specs", nargs=-1, required=True, type=click.Path(dir_okay=False, path_type=Path))
@OUT
@MAX_TERMS
@click.option("--json", "as_json", is_flag=True, help="Print the changes as JSON (always a document).")
@spec_errors
def diff(specs, out, as_json):
    """Formula-level changes: `diff SPEC` against its built manifest, or `diff OLD NEW`.

    OLD and NEW are specs or manifests (*.json).  Per kernel: added, removed, changed signature
    or cost, and each output term that appears, disappears or changes coefficient.  Exit 0 and
    print nothing when nothing changed; exit 1 when something did.
    """
    if len(specs) > 2 or (len(specs) == 2 and out is not None):
        raise click.UsageError("give SPEC (with an optional --out) or OLD_SPEC NEW_SPEC")
    d = diff_mod.compare(*diff_mod.sides(specs, out))
    stream = sys.stdout
    if as_json:
        click.echo(diffview.render_json(d))
    elif d.changed:
        colour = diffview.use_colour(stream)
        click.echo(diffview.render_text(d, colour, diffview.dot_for(stream)), color=colour)
    if d.changed:
        sys.exit(EXIT_DIFFERENT)


SPEC = click.argument("spec", type=click.Path(dir_okay=False, path_type=Path))


@main.command()
@SPEC
@click.argument("kernel", required=False)
@click.option("--text", "style", flag_value="text", default=True, help="Plain text (default).")
@click.option("--latex", "style", flag_value="latex", help="LaTeX align* blocks.")
@click.option("--markdown", "style", flag_value="markdown", help="Markdown tables.")
@MAX_TERMS
@spec_errors
def show(spec, kernel, style):
    """Print the exact formulas of one KERNEL or all kernels of SPEC, with operation counts."""
    click.echo(show_mod.show(spec, kernel, style))


@main.command("table")
@SPEC
@click.option("--op", default="geometric", show_default=True, type=click.Choice(show_mod.table_ops()),
              help="The product of two blades to tabulate.")
@click.option("--png", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Also draw the table into this PNG file (needs matplotlib, the 'plot' extra).")
@spec_errors
def table_command(spec, op, png):
    """Print the multiplication table of the basis blades of SPEC's algebra (n <= 6)."""
    if png is not None:
        size = show_mod.table_png(spec, png, op)
        click.echo(f"wrote {png} ({size} x {size} pixels)")
    else:
        click.echo(show_mod.table_text(spec, op))


@main.command()
@click.argument("name")
@click.option("--signature", required=True,
              help="P,Q,R: how many basis vectors square to +1, -1 and 0 (R may be omitted).")
@click.option("--out", "out_file", type=click.Path(dir_okay=False), default=None,
              help="The spec file to write (default: NAME.toml).")
@click.option("--force", is_flag=True, help="Overwrite an existing file.")
@spec_errors
def init(name, signature, out_file, force):
    """Write a commented starter spec for the algebra NAME with the given signature."""
    path = starter.write_starter(name, signature, out_file, force)
    click.echo(f"wrote {path}; next: bladesmith build {path}")
