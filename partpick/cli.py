"""The ``partpick`` command line. The only module that imports click: it parses,
dispatches to the library and the renderers in :mod:`partpick.export`, and maps errors
to exit codes.

Results go to stdout, diagnostics to stderr. Exit codes: 0 done, 1 no design meets
the spec (with the reason), 2 bad input (one line naming file, line and field).
"""

from __future__ import annotations

import functools
import os
import sys
from pathlib import Path

import click

from partpick import __version__
from partpick import inputs as opt
from partpick.catalog import KINDS, default_catalog_dir, load_catalog
from partpick.errors import PartpickError, failure, one_line
from partpick.fileio import as_program, exit_on_signals
from partpick.inputs import catalog_for, load_inputs as _inputs
from partpick.starter import STARTER_SPEC

__all__ = ["main"]


def _fail(message: str, code: int):
    # a refusal (exit 1) keeps its lines: what binds, then the nearest designs; each
    # line is still made safe to print
    lines = message.split("\n") if code == 1 else [message]
    click.echo("error: " + "\n".join(one_line(line, shorten=False) for line in lines), err=True)
    sys.exit(code)


def _guarded(func):
    """Turn any error into one line on stderr and its exit code (:func:`errors.failure`);
    PARTPICK_DEBUG=1 lets an unexpected one show its traceback."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except (Exception, KeyboardInterrupt) as exc:
            if os.environ.get("PARTPICK_DEBUG") and not isinstance(exc, PartpickError):
                raise
            _fail(*failure(exc))

    return wrapper


class _Group(click.Group):
    """click, with its usage errors as one line (``error: ... (see 'partpick x --help')``,
    exit 2), and SIGTERM and SIGHUP cleaned up after like Ctrl-C."""

    def main(self, *args, **kwargs):   # (the program, unless a caller passes its own arguments: tests)
        return as_program(lambda: self._main(*args, **kwargs), not args and "args" not in kwargs)

    def _main(self, *args, **kwargs):
        kwargs.pop("standalone_mode", None)
        exit_on_signals()
        try:
            return super().main(*args, standalone_mode=False, **kwargs)
        except click.exceptions.Exit as exc:
            sys.exit(exc.exit_code)
        except click.Abort:
            _fail("interrupted", 130)
        except click.ClickException as exc:
            ctx = getattr(exc, "ctx", None)
            _fail(exc.format_message() + (f" (see '{ctx.command_path} --help')" if ctx else ""), exc.exit_code)


_PATH = click.Path(path_type=Path, readable=False)  # partpick reads and says why not itself
_spec_argument = click.argument("spec_path", metavar="SPEC", type=_PATH)
_bom_argument = click.argument("bom_path", metavar="BOM", type=_PATH)
_force_option = click.option("--force", is_flag=True, help="Overwrite files that already exist.")
_format_option = click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text",
                              show_default=True)
_catalog_option = click.option(
    "--catalog", "catalog_paths", multiple=True, type=_PATH,
    help="Catalog folder or file (repeatable). Default: the spec's 'catalogs', "
         "$PARTPICK_CATALOGS, ./catalogs, or the shipped demo catalog.")
_samples_option = click.option("--samples", type=int, default=20_000, show_default=True,
                               help=f"Monte Carlo builds per candidate, {opt.SAMPLES[0]} .. {opt.SAMPLES[1]} "
                                    "(seeded: reruns agree).")
_seed_help = f"seed, 0 .. {opt.SEED_MAX}."


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
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
    from partpick.export.files import plan_one

    plan, path = plan_one(path, "PATH", force=force)
    plan.write(path, STARTER_SPEC)
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
@click.option("--seed", type=int, default=1, show_default=True, help=f"Monte Carlo {_seed_help}")
@_guarded
def check(spec_path, bom_path, catalog_paths, transient, fmt, samples, seed) -> None:
    """Verify the design in BOM against SPEC: each requirement with its predicted value,
    limit, verdict and margin. Exit 1 when a requirement fails."""
    import json

    from partpick.export.verdict import check_data, check_text, transient_text
    from partpick.pipeline import evaluate_bom
    from partpick.verify import transient_check

    opt.check_seed(seed)
    opt.check_samples(samples)
    spec, cat, stock = _inputs(spec_path, catalog_paths)
    with opt.physics_of(opt.load_bom_for(bom_path, spec, cat)) as bom:
        r = evaluate_bom(bom, spec, cat, stock, samples=samples, seed=seed)
        tran = transient_check(r.circuit, r.verdict.nominal.cond) if transient and fmt != "json" else None
    if fmt == "json":
        click.echo(json.dumps(check_data(spec_path, bom_path, r), indent=2, default=lambda x: None))
    else:
        click.echo(check_text(spec_path, bom_path, r, spec) + ("\n\n" + transient_text(tran, spec) if tran else ""))
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
    from partpick.export.files import plan_one
    from partpick.pipeline import netlist_text

    opt.check_number("--cycles", cycles, opt.CYCLES)
    plan, out = plan_one(out, "--out", force=force) if str(out) != "-" else (None, out)
    spec, cat, _ = _inputs(spec_path, catalog_paths)
    with opt.physics_of(opt.load_bom_for(bom_path, spec, cat)) as bom:
        text = netlist_text(bom, spec, cat, cycles)
    click.echo(text, nl=False) if plan is None else click.echo(f"wrote {plan.write(out, text)}")


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
@click.option("--budget", type=click.IntRange(1, 1000), default=None, help="Candidates verified at most (default 40).")
@click.option("--plots", "plots_dir", type=_PATH, default=None,
              help="Write frequency and amplitude histograms of the top candidate as PNG (needs the plot extra).")
@click.option("--report", "report_path", type=_PATH, default=None,
              help="Write a self-contained HTML report of the run (needs the report extra).")
@click.option("--quiet", "-q", is_flag=True, help="Only the summary line (and errors).")
@click.option("--verbose", "-v", is_flag=True, help="Also the dropped parts and the time of each stage.")
@_guarded
def design_cmd(spec_path, catalog_paths, results, rank_by, fmt, out_dir, force, seed, explain, why_not,
               samples, budget, plots_dir, report_path, quiet, verbose):
    """Search standard values for SPEC and print ranked, verified bills of materials."""
    from partpick.export import summary as out_
    from partpick.export.files import plan_design, write_design
    from partpick.export.terminal import colour_enabled, coloured_verdicts, progress as progress_line
    from partpick.pipeline import design

    opt.check_seed(seed)
    keys = opt.rank_keys(rank_by)
    spec, cat, stock = _inputs(spec_path, catalog_paths)
    n = results or spec.results
    opt.check_samples(samples, n)
    files = plan_design(spec, spec_path, out_dir=out_dir, plots_dir=plots_dir, report_path=report_path, results=n,
                        force=force)
    with progress_line(not quiet, f"verifying candidates (physics + {samples} Monte Carlo builds each)") as progress:
        d = design(spec, cat, stock=stock, results=results, seed=seed, rank_by=keys, samples=samples,
                   progress=progress, nearest=why_not or 3, budget=budget)
    notes = fmt != "text"  # side messages go to stderr when stdout carries data
    text = out_.design_output(d, spec, spec_path, cat, fmt, keys=keys, quiet=quiet, verbose=verbose, stock=stock)
    click.echo(coloured_verdicts(text) if fmt == "text" and colour_enabled() else text)
    if explain or verbose:
        click.echo("\n" + out_.explain_text(d, spec), err=notes)
    for line in write_design(files, d, spec, spec_path, cat, stock=stock):
        click.echo(line, err=notes)


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
    from partpick.bom import bom_to_yaml
    from partpick.export.files import plan_one
    from partpick.export.swap_view import swap_text
    from partpick.stock import load_stock
    from partpick.swap import swap

    opt.check_samples(samples)
    plan, out_path = plan_one(out_path, "--out", force=force) if out_path is not None else (None, None)
    spec, cat, _ = _inputs(spec_path, catalog_paths)
    stock = load_stock(stock_path, cat)
    with opt.physics_of(opt.load_bom_for(bom_path, spec, cat)) as bom:
        res = swap(spec, cat, bom, stock, all_lines=all_lines, samples=samples)
    click.echo(swap_text(res, stock, cat, bom_path, stock_path, spec))
    if plan is not None:
        header = f"partpick swap of {bom_path} to {stock_path}"
        click.echo(f"wrote {plan.write(out_path, bom_to_yaml(res.after.bom, header=header, catalog=cat))}")


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
    from partpick.export.files import plan_tradeoff_plot
    from partpick.export.terminal import progress as progress_line
    from partpick.export.tradeoff_view import tradeoff_json, tradeoff_text
    from partpick.tradeoff import tradeoff

    opt.check_samples(samples)
    spec, cat, stock = _inputs(spec_path, catalog_paths)
    plan, png = plan_tradeoff_plot(spec, spec_path, plots_dir, force=force) if plots_dir is not None else (None, None)
    with progress_line(True, "design runs") as progress:
        points, front = tradeoff(spec, cat, stock=stock, samples=samples, progress=progress)
    click.echo(tradeoff_json(points, front) if fmt == "json" else tradeoff_text(spec, cat, points, front, samples))
    if plan is not None:
        from partpick.export.plots import front_plot

        click.echo(f"wrote {plan.done(front_plot(points, front, spec, png, force=force))}", err=fmt != "text")


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
    from partpick.export.files import plan_report, report_html
    from partpick.pipeline import design
    from partpick.tradeoff import tradeoff

    opt.check_samples(samples)
    spec, cat, stock = _inputs(spec_path, catalog_paths)
    plan, out = plan_report(spec, spec_path, out, force=force)
    d = design(spec, cat, stock=stock, samples=samples)
    points, front = tradeoff(spec, cat, stock=stock, samples=samples, extra=d.ranked)
    click.echo(f"wrote {plan.write(out, report_html(spec, d, cat, stock=stock, points=points, front=front))}")
