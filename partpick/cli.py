"""The ``partpick`` command line. The only module that imports click: it parses,
dispatches to the library and the renderers in :mod:`partpick.export`, and maps errors
to exit codes.

Results go to stdout, diagnostics to stderr. Exit codes: 0 done, 1 no design meets
the spec (with the reason), 2 bad input (one line naming file, line and field).
"""

from __future__ import annotations

import functools
import sys
from pathlib import Path

import click

from partpick import __version__
from partpick.catalog import KINDS, default_catalog_dir, load_catalog
from partpick.errors import PartpickError
from partpick.fileio import write_atomic
from partpick.inputs import catalog_for, load_inputs as _inputs
from partpick.starter import STARTER_SPEC

__all__ = ["main"]


def _guarded(func):
    """Turn partpick's errors into one line on stderr and the matching exit code."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except PartpickError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(exc.exit_code)

    return wrapper


_PATH = click.Path(path_type=Path)
_spec_argument = click.argument("spec_path", metavar="SPEC", type=_PATH)
_bom_argument = click.argument("bom_path", metavar="BOM", type=_PATH)
_force_option = click.option("--force", is_flag=True, help="Overwrite files that already exist.")
_format_option = click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text",
                              show_default=True)
_catalog_option = click.option(
    "--catalog", "catalog_paths", multiple=True, type=_PATH,
    help="Catalog folder or file (repeatable). Default: the spec's 'catalogs', "
         "$PARTPICK_CATALOGS, ./catalogs, or the shipped demo catalog.")
_samples_option = click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True,
                               help="Monte Carlo builds per candidate (seeded: reruns agree).")


def _progress(enabled: bool, what: str):
    """A progress line on stderr when it is a terminal."""
    if not (enabled and sys.stderr.isatty()):
        return None

    def progress(done, total):
        click.echo(f"\r{what}: {done}/{total}", err=True, nl=done >= total)
    return progress


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="partpick")
def main() -> None:
    """partpick: standard-value parts for a sine oscillator, from a YAML spec,
    verified by circuit physics and ranked as bills of materials."""


# -- catalog ------------------------------------------------------------------------------

@main.group()
def catalog() -> None:
    """Show or check part catalogs."""


@catalog.command("list")
@_catalog_option
@click.option("--kind", type=click.Choice(KINDS), help="Show one kind only.")
@_guarded
def catalog_list(catalog_paths, kind) -> None:
    """List the part families of the catalog."""
    from partpick.export.catalog_table import catalog_text

    click.echo(catalog_text(catalog_for(catalog_paths), (kind,) if kind else KINDS))


@catalog.command("validate")
@click.argument("paths", nargs=-1, type=_PATH)
@_guarded
def catalog_validate(paths) -> None:
    """Check catalog files (default: the default catalog folder)."""
    cat = load_catalog(list(paths) if paths else [default_catalog_dir()])
    counts = ", ".join(f"{len(cat.of_kind(k))} {k}" for k in KINDS)
    click.echo(f"ok: {len(cat.sources)} file(s), {counts}")


# -- spec and init ---------------------------------------------------------------------------

@main.group("spec")
def spec_group() -> None:
    """Work with spec files."""


@spec_group.command("check")
@_spec_argument
@_catalog_option
@_format_option
@_guarded
def spec_check(spec_path, catalog_paths, fmt) -> None:
    """Print SPEC as partpick understands it, normalised to SI units."""
    from partpick.export.spec_view import spec_json, spec_text

    spec, cat, stock = _inputs(spec_path, catalog_paths)
    click.echo(spec_json(spec, spec_path) if fmt == "json" else spec_text(spec, spec_path, cat, stock))


@main.command("init")
@click.argument("path", required=False, default="spec.yaml", type=_PATH)
@_force_option
@_guarded
def init(path, force) -> None:
    """Write a commented starter spec to PATH (default spec.yaml)."""
    write_atomic(path, STARTER_SPEC, force=force)
    click.echo(f"wrote {path}; edit it, then run: partpick spec check {path}")


# -- check and netlist ---------------------------------------------------------------------------

@main.command("check")
@_spec_argument
@_bom_argument
@_catalog_option
@click.option("--transient", is_flag=True, help="Also simulate the nominal circuit from a small kick to its "
                                                 "settled state and report what it shows.")
@_format_option
@_samples_option
@click.option("--seed", type=int, default=1, show_default=True, help="Monte Carlo seed.")
@_guarded
def check(spec_path, bom_path, catalog_paths, transient, fmt, samples, seed) -> None:
    """Verify the design in BOM against SPEC: each requirement with its predicted value,
    limit, verdict and margin. Exit 1 when a requirement fails."""
    import json

    from partpick.bom import load_bom
    from partpick.export.verdict import check_data, check_text, transient_text
    from partpick.pipeline import evaluate_bom
    from partpick.verify import transient_check

    spec, cat, stock = _inputs(spec_path, catalog_paths)
    r = evaluate_bom(load_bom(bom_path, cat), spec, cat, stock, samples=samples, seed=seed)
    if fmt == "json":
        click.echo(json.dumps(check_data(spec_path, bom_path, r), indent=2, default=lambda x: None))
    else:
        click.echo(check_text(spec_path, bom_path, r, spec))
        if transient:
            click.echo("")
            click.echo(transient_text(transient_check(r.circuit, r.verdict.nominal.cond), spec))
    if not r.verdict.passed:
        sys.exit(1)


@main.command("netlist")
@_bom_argument
@click.option("--spec", "spec_path", type=_PATH, required=True,
              help="Spec giving the supply, load and temperature to simulate at (its nominal point).")
@_catalog_option
@click.option("-o", "--out", "out", type=_PATH, default="-", show_default=True,
              help="Output file; '-' is stdout.")
@_force_option
@click.option("--cycles", type=float, default=None, help="Cycles in the .tran line (default: enough to settle).")
@_guarded
def netlist(bom_path, spec_path, catalog_paths, out, force, cycles) -> None:
    """Write a SPICE netlist of the design in BOM, ready to run (.tran), with a
    behavioural op-amp subcircuit from the catalog data."""
    from partpick.bom import load_bom
    from partpick.pipeline import netlist_text

    spec, cat, _ = _inputs(spec_path, catalog_paths)
    text = netlist_text(load_bom(bom_path, cat), spec, cat, cycles)
    if str(out) == "-":
        click.echo(text, nl=False)
    else:
        write_atomic(out, text, force=force)
        click.echo(f"wrote {out}")


# -- design -------------------------------------------------------------------------------------

@main.command("design")
@_spec_argument
@_catalog_option
@click.option("--results", "-n", type=click.IntRange(1, 100), default=None, help="How many ranked BOMs (default: the spec's).")
@click.option("--rank-by", "rank_by", default=None,
              help="Comma-separated ranking keys (yield, frequency_error, amplitude_error, thd, startup_margin, cost, parts).")
@click.option("--format", "fmt", type=click.Choice(["text", "json", "csv", "yaml"]), default="text", show_default=True)
@click.option("--out", "out_dir", type=_PATH, default=None,
              help="Write one BOM file per candidate (YAML) into this folder.")
@_force_option
@click.option("--seed", type=int, default=0, show_default=True, help="Monte Carlo seed (reruns agree).")
@click.option("--explain", is_flag=True, help="Also say which parts were left out and why, and the rules in force.")
@click.option("--why-not", "why_not", type=click.IntRange(1, 50), default=None,
              help="On a refusal, show this many nearest designs (default 3).")
@_samples_option
@click.option("--plots", "plots_dir", type=_PATH, default=None,
              help="Write frequency and amplitude histograms of the top candidate as PNG (needs the plot extra).")
@click.option("--report", "report_path", type=_PATH, default=None,
              help="Write a self-contained HTML report of the run (needs the report extra).")
@click.option("--quiet", "-q", is_flag=True, help="Only the summary line (and errors).")
@click.option("--verbose", "-v", is_flag=True, help="Also the dropped parts and the time of each stage.")
@_guarded
def design_cmd(spec_path, catalog_paths, results, rank_by, fmt, out_dir, force, seed, explain, why_not,
               samples, plots_dir, report_path, quiet, verbose):
    """Search standard values for SPEC and print ranked, verified bills of materials."""
    from partpick.export import summary as out_
    from partpick.pipeline import design
    from partpick.spec import RANK_KEYS

    spec, cat, stock = _inputs(spec_path, catalog_paths)
    keys = None
    if rank_by:
        keys = tuple(k.strip() for k in rank_by.split(",") if k.strip())
        bad = [k for k in keys if k not in RANK_KEYS]
        if bad:
            raise click.BadParameter(f"unknown key(s) {', '.join(bad)}; expected {', '.join(RANK_KEYS)}",
                                     param_hint="--rank-by")
    progress = _progress(not quiet, f"verifying candidates (physics + {samples} Monte Carlo builds each)")
    explain = explain or verbose
    d = design(spec, cat, stock=stock, results=results, seed=seed, rank_by=keys, samples=samples, progress=progress,
               nearest=why_not or 3)
    notes = fmt != "text"  # side messages go to stderr when stdout carries data
    text = out_.design_output(d, spec, spec_path, cat, fmt, keys=keys, quiet=quiet, verbose=verbose, stock=stock)
    if fmt == "text" and sys.stdout.isatty():  # colour only on a terminal
        for word, colour in (("pass", "green"), ("FAIL", "red")):
            text = text.replace(f" {word} ", f" {click.style(word, fg=colour)} ")
    click.echo(text)
    if explain:
        click.echo("\n" + out_.explain_text(d, spec), err=notes)
    if report_path is not None:
        from partpick.export.report import render_report
        from partpick.verify import nominal_spectrum

        best = d.ranked[0]
        spectrum = nominal_spectrum(best.circuit, best.verdict.nominal.cond)
        write_atomic(report_path, render_report(spec, d, cat, stock=stock, spectrum=spectrum), force=force)
        click.echo(f"wrote {report_path}", err=notes)
    if plots_dir is not None and d.ranked[0].mc is not None:
        from partpick.export.plots import histograms

        path = histograms(d.ranked[0].mc, spec, Path(plots_dir) / f"{spec.name}-01-histograms.png", force=force)
        click.echo(f"wrote {path}", err=notes)
    if out_dir is not None:
        from partpick.export.files import write_candidates

        write_candidates(d, spec, spec_path, cat, out_dir, force=force, stock=stock)
        click.echo(f"wrote {len(d.ranked)} BOM file(s) to {out_dir}", err=notes)


# -- swap, tradeoff, report ---------------------------------------------------------------------

@main.command("swap")
@_spec_argument
@_bom_argument
@click.option("--stock", "stock_path", type=_PATH, required=True, help="Stock list (CSV).")
@click.option("--all", "all_lines", is_flag=True, help="Refill every slot from the shelf, not only the missing ones.")
@_catalog_option
@click.option("--out", "out_path", type=_PATH, default=None, help="Write the new BOM here.")
@_force_option
@_samples_option
@_guarded
def swap_cmd(spec_path, bom_path, stock_path, all_lines, catalog_paths, out_path, force, samples) -> None:
    """Replace the parts of BOM that are not on the shelf by stocked parts, re-verify, and
    print old against new. Exit 1 when no substitution meets SPEC."""
    from partpick.bom import bom_to_yaml, load_bom
    from partpick.export.swap_view import swap_text
    from partpick.stock import load_stock
    from partpick.swap import swap

    spec, cat, _ = _inputs(spec_path, catalog_paths)
    bom = load_bom(bom_path, cat)
    stock = load_stock(stock_path, cat)
    res = swap(spec, cat, bom, stock, all_lines=all_lines, samples=samples)
    click.echo(swap_text(res, stock, cat, bom_path, stock_path, spec))
    if out_path is not None:
        write_atomic(out_path, bom_to_yaml(res.after.bom, header=f"partpick swap of {bom_path} to {stock_path}",
                                           catalog=cat),
                     force=force)
        click.echo(f"wrote {out_path}")


@main.command("tradeoff")
@_spec_argument
@_catalog_option
@click.option("--plots", "plots_dir", type=_PATH, default=None,
              help="Draw the front as PNG (every design a dot, the front a line; needs the plot extra).")
@_force_option
@_samples_option
@_format_option
@_guarded
def tradeoff_cmd(spec_path, catalog_paths, plots_dir, force, samples, fmt) -> None:
    """Cost against accuracy: the designs no other is both cheaper and more accurate than."""
    from partpick.export.tradeoff_view import tradeoff_json, tradeoff_text
    from partpick.tradeoff import tradeoff

    spec, cat, stock = _inputs(spec_path, catalog_paths)
    points, front = tradeoff(spec, cat, stock=stock, samples=samples, progress=_progress(True, "design runs"))
    click.echo(tradeoff_json(points, front) if fmt == "json" else tradeoff_text(spec, cat, points, front, samples))
    if plots_dir is not None:
        from partpick.export.plots import front_plot

        path = front_plot(points, front, spec, Path(plots_dir) / f"{spec.name}-tradeoff.png", force=force)
        click.echo(f"wrote {path}", err=fmt != "text")


@main.command("report")
@_spec_argument
@_catalog_option
@click.option("-o", "--out", "out", type=_PATH, default=None,
              help="HTML file (default: NAME-report.html beside the working folder).")
@_force_option
@_samples_option
@_guarded
def report_cmd(spec_path, catalog_paths, out, force, samples) -> None:
    """Design SPEC, compute its cost-accuracy front, and write one self-contained HTML page."""
    from partpick.export.report import render_report
    from partpick.pipeline import design
    from partpick.tradeoff import tradeoff
    from partpick.verify import nominal_spectrum

    spec, cat, stock = _inputs(spec_path, catalog_paths)
    d = design(spec, cat, stock=stock, samples=samples)
    points, front = tradeoff(spec, cat, stock=stock, samples=samples, extra=d.ranked)
    best = d.ranked[0]
    spectrum = nominal_spectrum(best.circuit, best.verdict.nominal.cond)
    out = out or Path(f"{spec.name}-report.html")
    write_atomic(out, render_report(spec, d, cat, points=points, front=front, stock=stock, spectrum=spectrum),
                 force=force)
    click.echo(f"wrote {out}")
