"""The ``partpick`` command line. The only module that imports click.

Results go to stdout, diagnostics to stderr. Exit codes: 0 done, 1 no design meets
the spec (with the reason), 2 bad input (one line naming file, line and field).
"""

from __future__ import annotations

import functools
import json
import math
import sys
from pathlib import Path

import click

from partpick import __version__, units
from partpick.catalog import KINDS, Catalog, default_catalog_dir, load_catalog
from partpick.errors import PartpickError
from partpick.export.table import render_table
from partpick.fileio import write_atomic
from partpick.spec import Spec, check_parts
from partpick.starter import STARTER_SPEC
from partpick.stock import load_stock

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


_catalog_option = click.option(
    "--catalog", "catalog_paths", multiple=True, type=click.Path(path_type=Path),
    help="Catalog folder or file (repeatable). Default: the spec's 'catalogs', "
         "$PARTPICK_CATALOGS, ./catalogs, or the shipped demo catalog.")


def _load_catalog(paths, spec: Spec | None = None) -> Catalog:
    if paths:
        return load_catalog(list(paths))
    if spec is not None and spec.catalogs:
        return load_catalog(list(spec.catalogs))
    return load_catalog([default_catalog_dir()])


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="partpick")
def main() -> None:
    """partpick: standard-value parts for a sine oscillator, from a YAML spec,
    verified by circuit physics and ranked as bills of materials."""


# -- catalog ------------------------------------------------------------------------------

@main.group()
def catalog() -> None:
    """Show or check part catalogs."""


def _fmt(value: float, dim: str, digits: int | None = None) -> str:
    if value is None or (isinstance(value, float) and math.isinf(value)):
        return "-"
    return units.format_quantity(value, dim, digits)


def _price(*values: float) -> str:
    return " .. ".join(f"{v:.3f}" for v in values)


def _catalog_tables(cat: Catalog, kinds: tuple[str, ...]) -> str:
    parts = []
    if "resistors" in kinds and cat.resistors:
        parts.append("Resistor families\n" + render_table(
            ["id", "technology", "series", "tol", "tempco", "range", "power", "unit price"],
            [[f.id, f.technology, f.series, _fmt(f.tolerance_frac, "fraction"), _fmt(f.tempco_per_k, "tempco"),
              f"{_fmt(f.min_ohm, 'resistance')} .. {_fmt(f.max_ohm, 'resistance')}", _fmt(f.power_w, "power"),
              _price(f.price_unit)] for f in cat.resistors]))
    if "capacitors" in kinds and cat.capacitors:
        def temp(f):
            if f.has_band:
                return (f"+/-{_fmt(f.band_frac, 'fraction')} over {_fmt(f.band_min_k, 'temperature')}"
                        f"..{_fmt(f.band_max_k, 'temperature')}")
            return f"{_fmt(f.tempco_per_k, 'tempco')} +/- {_fmt(f.tempco_spread_per_k, 'tempco')}"
        parts.append("Capacitor families\n" + render_table(
            ["id", "dielectric", "series", "tol", "temperature", "range", "rating", "unit price"],
            [[f.id, f.dielectric, f.series, _fmt(f.tolerance_frac, "fraction"), temp(f),
              f"{_fmt(f.min_f, 'capacitance')} .. {_fmt(f.max_f, 'capacitance')}", _fmt(f.voltage_v, "voltage"),
              _price(f.price_at_min, f.price_at_max)] for f in cat.capacitors]))
    if "opamps" in kinds and cat.opamps:
        parts.append("Op-amps\n" + render_table(
            ["id", "GBW", "slew", "supply (total)", "headroom +/-", "I out", "RRIO", "unit price"],
            [[f.id, _fmt(f.gbw_hz, "frequency"), _fmt(f.slew_v_per_s, "slew_rate"),
              f"{_fmt(f.supply_min_v, 'voltage')} .. {_fmt(f.supply_max_v, 'voltage')}",
              f"{_fmt(f.headroom_high_v, 'voltage')} / {_fmt(f.headroom_low_v, 'voltage')}",
              _fmt(f.output_current_a, "current"),
              ("in " if f.rail_to_rail_in else "") + ("out" if f.rail_to_rail_out else "") or "-",
              _price(f.price_unit)] for f in cat.opamps]))
    if "limiters" in kinds and cat.limiters:
        parts.append("Limiter elements\n" + render_table(
            ["id", "kind", "Is", "n", "Rs", "Vz", "unit price"],
            [[f.id, f.kind, _fmt(f.is_a, "current"), f"{f.n:g}", _fmt(f.rs_ohm, "resistance"),
              _fmt(f.vz_v, "voltage") if f.kind == "zener-pair" else "-", _price(f.price_unit)]
             for f in cat.limiters]))
    return "\n\n".join(parts)


@catalog.command("list")
@_catalog_option
@click.option("--kind", type=click.Choice(KINDS), help="Show one kind only.")
@_guarded
def catalog_list(catalog_paths, kind) -> None:
    """List the part families of the catalog."""
    cat = _load_catalog(catalog_paths)
    if cat.demo:
        click.echo("Demo catalog: invented parts for trying partpick out; use your own approved parts.\n")
    click.echo(_catalog_tables(cat, (kind,) if kind else KINDS))
    click.echo(f"\nPrices in {cat.currency}. Read {len(cat.sources)} file(s).")


@catalog.command("validate")
@click.argument("paths", nargs=-1, type=click.Path(path_type=Path))
@_guarded
def catalog_validate(paths) -> None:
    """Check catalog files (default: the default catalog folder)."""
    cat = load_catalog(list(paths) if paths else [default_catalog_dir()])
    counts = ", ".join(f"{len(cat.of_kind(k))} {k}" for k in KINDS)
    click.echo(f"ok: {len(cat.sources)} file(s), {counts}")


# -- spec ------------------------------------------------------------------------------------

@main.group("spec")
def spec_group() -> None:
    """Work with spec files."""


_SI_DIM = {"Hz": "frequency", "V": "voltage", "ohm": "resistance", "F": "capacitance", "K": "temperature"}


@spec_group.command("check")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@_catalog_option
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text", show_default=True)
@_guarded
def spec_check(spec_path, catalog_paths, fmt) -> None:
    """Print SPEC as partpick understands it, normalised to SI units."""
    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    check_parts(spec, cat)
    stock = load_stock(spec.stock.path, cat) if spec.stock else None
    rows = spec.normalised()
    if fmt == "json":
        def plain(v):
            return None if isinstance(v, float) and math.isinf(v) else v
        click.echo(json.dumps({"source": str(spec_path), "fields": {k: {"value": plain(v), "unit": u}
                                                                    for k, v, u in rows}}, indent=2))
        return
    table = []
    for key, value, unit in rows:
        if isinstance(value, float):
            dim = _SI_DIM.get(unit.split(" per ")[0]) or ("fraction" if unit == "1" else None)
            shown = _fmt(value, dim) if dim else ""
            if key == "amplitude.target":
                peak = units.Amplitude(float(f"{spec.amplitude.peak_v:.4g}"), "pk")
                shown = units.format_amplitude(peak)
            table.append([key, f"{value:.6g}", unit, shown])
        else:
            table.append([key, str(value), unit, ""])
    stocked = f", stock list of {len(stock.items)} line(s)" if stock else ""
    click.echo(f"spec {spec_path}: ok ({len(cat.sources)} catalog file(s){stocked})")
    click.echo(render_table(["field", "SI value", "SI unit", "reads as"], table))


# -- init --------------------------------------------------------------------------------------

@main.command("init")
@click.argument("path", required=False, default="spec.yaml", type=click.Path(path_type=Path))
@click.option("--force", is_flag=True, help="Overwrite PATH if it exists.")
@_guarded
def init(path, force) -> None:
    """Write a commented starter spec to PATH (default spec.yaml)."""
    write_atomic(path, STARTER_SPEC, force=force)
    click.echo(f"wrote {path}; edit it, then run: partpick spec check {path}")


# -- check -----------------------------------------------------------------------------------

def _failure_line(c) -> str:
    from partpick.export.verdict import _fmt

    if c.low is not None and c.value < c.low:
        return f"{c.name}: {_fmt(c.value, c.dim)} is below {_fmt(c.low, c.dim)} by {_fmt(c.low - c.value, c.dim)}"
    if c.high is not None and c.value > c.high:
        return f"{c.name}: {_fmt(c.value, c.dim)} is above {_fmt(c.high, c.dim)} by {_fmt(c.value - c.high, c.dim)}"
    return f"{c.name}: no prediction"


@main.command("check")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@click.argument("bom_path", metavar="BOM", type=click.Path(path_type=Path))
@_catalog_option
@click.option("--transient", is_flag=True, help="Also simulate the nominal circuit from a small kick to its "
                                                 "settled state and report what it shows.")
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text", show_default=True)
@click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True,
              help="Monte Carlo builds.")
@click.option("--seed", type=int, default=1, show_default=True, help="Monte Carlo seed.")
@_guarded
def check(spec_path, bom_path, catalog_paths, transient, fmt, samples, seed) -> None:
    """Verify the design in BOM against SPEC: each requirement with its predicted value,
    limit, verdict and margin. Exit 1 when a requirement fails."""
    from partpick.bom import load_bom, part_data
    from partpick.export.verdict import render_point, render_verdict
    from partpick.verify import verify

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    bom = load_bom(bom_path, cat)
    circuit = bom.to_circuit(cat)
    tol, tc, rating = part_data(bom, cat)
    verdict = verify(circuit, spec, tolerances=tol, tempcos=tc, ratings=rating)
    mc = None
    if verdict.nominal.starts:
        from partpick.tolerance import with_yield

        verdict, mc, worst = with_yield(verdict, circuit, bom, cat, spec, samples=samples, seed=seed)
    if fmt == "json":
        data = {"spec": str(spec_path), "bom": str(bom_path), "passed": verdict.passed,
                "checks": [_check_json(c) for c in verdict.checks],
                "cautions": list(verdict.cautions),
                "monte_carlo": None if mc is None else {"samples": mc.samples, "seed": mc.seed, "yield": mc.yield_frac,
                                                       "shares": mc.share, "stats": mc.stats,
                                                       "samples_needed": mc.needed}}
        click.echo(json.dumps(data, indent=2, default=lambda x: None))
    else:
        status = "PASS" if verdict.passed else f"FAIL ({len(verdict.failed())} of {len(verdict.checks)} requirements)"
        click.echo(f"{bom_path} against {spec_path}: {status}")
        click.echo(f"textbook f0 {circuit.f0_hz:.6g} Hz, gain {circuit.gain:.4g} (needs {circuit.required_gain:.4g})")
        for name, point in verdict.corners.items():
            click.echo(render_point(name, point))
        click.echo("")
        click.echo(render_verdict(verdict))
        if mc is not None:
            st = mc.stats.get("frequency_hz")
            if st:
                click.echo(f"Monte Carlo ({mc.samples} builds, seed {mc.seed}): yield {mc.yield_frac:.1%}; frequency "
                           f"mean {st['mean']:.6g} Hz, sd {st['std']:.3g} Hz, 0.1..99.9 % {st['q001']:.6g}.."
                           f"{st['q999']:.6g} Hz; {mc.needed} builds give a +/-0.5 % yield")
                click.echo(_worst_line(worst))
        for c in verdict.failed():
            click.echo(f"fails: {_failure_line(c)}")
        for caution in verdict.cautions:
            click.echo(f"caution: {caution}")
        if transient:
            click.echo("")
            click.echo(_transient_report(circuit, verdict.nominal.cond))
    if not verdict.passed:
        sys.exit(1)


def _worst_line(wc: dict) -> str:
    lo, hi = wc["frequency_hz"]
    alo, ahi = wc["amplitude_v"]
    return (f"worst case (tolerance and temperature corners): margin {wc['margin'] * 100:+.2f} %, frequency "
            f"{lo:.6g}..{hi:.6g} Hz, amplitude {alo:.4g}..{ahi:.4g} V peak")


def _transient_report(circuit, cond) -> str:
    from partpick.physics.transient import simulate
    from partpick.physics.waveform import settle_time
    from partpick.topologies.wien import build_netlist
    from partpick.verify import transient_cycles_for, predict

    point = predict(circuit, cond)
    if not point.starts:
        return "transient: the circuit does not start (the kick dies away)"
    net = build_netlist(circuit, cond)
    cycles = transient_cycles_for(point.lin, circuit.f0_hz, max(point.osc_peak_v, 1e-3))
    res = simulate(net, cycles=cycles, record=("osc", "load"))
    st = res.stats("load")
    if st is None:
        return "transient: no oscillation within the simulated time"
    t_settle = settle_time(res.t_s, res.v["load"], st.peak_v)
    settle = f"{t_settle * 1e3:.4g} ms" if t_settle is not None else "not within the run"
    return (f"transient ({cycles:.0f} cycles from a 10 mV kick): {st.freq_hz:.6g} Hz, {st.vpp_v:.4g} Vpp at the load, "
            f"THD {st.thd_frac * 100:.3g} %, settles (2 %) after {settle}"
            + ("" if st.settled else "; still changing at the end"))


# -- netlist ---------------------------------------------------------------------------------

@main.command("netlist")
@click.argument("bom_path", metavar="BOM", type=click.Path(path_type=Path))
@click.option("--spec", "spec_path", type=click.Path(path_type=Path), required=True,
              help="Spec giving the supply, load and temperature to simulate at (its nominal point).")
@_catalog_option
@click.option("-o", "--out", "out", type=click.Path(path_type=Path), default="-", show_default=True,
              help="Output file; '-' is stdout.")
@click.option("--force", is_flag=True, help="Overwrite --out if it exists.")
@click.option("--cycles", type=float, default=None, help="Cycles in the .tran line (default: enough to settle).")
@_guarded
def netlist(bom_path, spec_path, catalog_paths, out, force, cycles) -> None:
    """Write a SPICE netlist of the design in BOM, ready to run (.tran), with a
    behavioural op-amp subcircuit from the catalog data."""
    from partpick.bom import load_bom
    from partpick.export.spice import to_spice
    from partpick.topologies.wien import build_netlist
    from partpick.verify import operating_conditions, predict, transient_cycles_for

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    circuit = load_bom(bom_path, cat).to_circuit(cat)
    cond = operating_conditions(spec)["nominal"]
    if cycles is None:
        point = predict(circuit, cond)
        cycles = transient_cycles_for(point.lin, circuit.f0_hz, max(point.osc_peak_v, 1e-3)) if point.starts else 60
    text = to_spice(build_netlist(circuit, cond), cycles=cycles)
    if str(out) == "-":
        click.echo(text, nl=False)
    else:
        write_atomic(out, text, force=force)
        click.echo(f"wrote {out}")


# -- design ---------------------------------------------------------------------------------

def _bom_rows(r, catalog):
    from partpick.bom import ROLES
    from partpick.search import _pricer

    price = _pricer(catalog)  # the catalog price the search used (a limiter: its pair)
    rows = []
    for ln in r.bom.lines:
        dim = ROLES[ln.role][1]
        value = units.format_quantity(ln.value, dim, 3) if dim else ""
        rows.append([ln.ref, ln.role, value, ln.family, f"{price(ln.family, ln.value):.3f}"])
    return rows


def _summary(r) -> dict:
    v = r.verdict
    p = v.nominal
    return {
        "passed": v.passed,
        "frequency_hz": p.freq_hz, "frequency_error": r.freq_error,
        "amplitude_load_peak_v": p.load_peak_v, "amplitude_error": r.amp_error,
        "thd": r.thd, "startup_margin": p.lin.margin, "worst_corner_margin": v.worst_margin,
        "yield": r.yield_frac, "yield_shares": r.mc.share if r.mc else None,
        "monte_carlo": r.mc.stats if r.mc else None, "samples": r.mc.samples if r.mc else 0,
        "worst_case": r.worst,
        "cost": r.cost, "parts": r.parts, "stage": r.bom.stage,
        "failed": [c.name for c in v.failed()],
    }


def _check_json(c) -> dict:
    return {"name": c.name, "field": c.field, "value": c.value, "low": c.low, "high": c.high,
            "passed": c.passed, "margin": c.margin, "note": c.note}


def _design_table(d, catalog, spec) -> str:
    lines = []
    rows = []
    for i, r in enumerate(d.ranked, 1):
        s = _summary(r)
        lim = r.bom.line("limiter").family
        rows.append([i, "pass" if s["passed"] else "FAIL", f"{s['frequency_hz']:.6g} Hz", f"{s['frequency_error'] * 100:+.3f} %",
                     f"{s['amplitude_load_peak_v'] * 2:.4g} Vpp", f"{s['thd'] * 100:.2f} %",
                     f"{s['startup_margin'] * 100:.2f} %", f"{s['yield'] * 100:.1f} %",
                     f"{s['cost']:.3f}", s["parts"], r.bom.line("opamp").family, lim, r.bom.stage])
    lines.append(render_table(["#", "verdict", "frequency", "error", "at load", "THD", "margin", "yield",
                               f"cost {catalog.currency}", "parts", "op-amp", "limiter", "stage"], rows,
                              right=(0, 2, 3, 4, 5, 6, 7, 8, 9)))
    best = d.ranked[0]
    lines.append("")
    lines.append(f"#1 bill of materials (textbook f0 {best.circuit.f0_hz:.6g} Hz, gain {best.circuit.gain:.4g}, "
                 f"needs {best.circuit.required_gain:.4g}):")
    lines.append(render_table(["ref", "role", "value", "family", f"unit {catalog.currency}"], _bom_rows(best, catalog),
                              right=(4,), indent="  "))
    for caution in best.verdict.cautions:
        lines.append(f"caution: {caution}")
    return "\n".join(lines)


@main.command("design")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@_catalog_option
@click.option("--results", "-n", type=click.IntRange(1, 100), default=None, help="How many ranked BOMs (default: the spec's).")
@click.option("--rank-by", "rank_by", default=None,
              help="Comma-separated ranking keys (yield, frequency_error, amplitude_error, thd, startup_margin, cost, parts).")
@click.option("--format", "fmt", type=click.Choice(["text", "json", "csv", "yaml"]), default="text", show_default=True)
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=None,
              help="Write one BOM file per candidate (YAML) into this folder.")
@click.option("--force", is_flag=True, help="Overwrite BOM files in --out.")
@click.option("--time-limit", type=float, default=10.0, show_default=True, help="Solver time limit per round, s.")
@click.option("--workers", type=click.IntRange(1, 64), default=2, show_default=True, help="Solver threads.")
@click.option("--seed", type=int, default=0, show_default=True, help="Solver random seed (results are deterministic).")
@click.option("--explain", is_flag=True, help="Also say which op-amps and limiters were dropped, and why.")
@click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True,
              help="Monte Carlo builds per candidate (seeded: reruns agree).")
@click.option("--plots", "plots_dir", type=click.Path(path_type=Path), default=None,
              help="Write frequency and amplitude histograms of the top candidate as PNG (needs the plot extra).")
@click.option("--report", "report_path", type=click.Path(path_type=Path), default=None,
              help="Write a self-contained HTML report of the run (needs the report extra).")
@click.option("--quiet", "-q", is_flag=True, help="Only the summary line (and errors).")
@click.option("--verbose", "-v", is_flag=True, help="Also the dropped parts and the time of each stage.")
@_guarded
def design_cmd(spec_path, catalog_paths, results, rank_by, fmt, out_dir, force, time_limit, workers, seed, explain,
               samples, plots_dir, report_path, quiet, verbose):
    """Search standard values for SPEC and print ranked, verified bills of materials."""
    from partpick.bom import bom_to_csv, bom_to_purchase_csv, bom_to_yaml
    from partpick.design import design
    from partpick.spec import RANK_KEYS

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    keys = None
    if rank_by:
        keys = tuple(k.strip() for k in rank_by.split(",") if k.strip())
        bad = [k for k in keys if k not in RANK_KEYS]
        if bad:
            raise click.BadParameter(f"unknown key(s) {', '.join(bad)}; expected {', '.join(RANK_KEYS)}",
                                     param_hint="--rank-by")
    progress = None
    if sys.stderr.isatty() and not quiet:
        def progress(done, total):
            click.echo(f"\rverifying candidates (physics + {samples} Monte Carlo builds each): {done}/{total}",
                       err=True, nl=done >= total)
    explain = explain or verbose
    d = design(spec, cat, results=results, time_limit_s=time_limit, workers=workers, seed=seed, rank_by=keys,
               samples=samples, progress=progress)
    if fmt == "json":
        click.echo(json.dumps({"spec": str(spec_path), "candidates": [
            {"rank": i, **_summary(r), "bom": [{"ref": ln.ref, "role": ln.role, "family": ln.family, "value": ln.value}
                                               for ln in r.bom.lines]} for i, r in enumerate(d.ranked, 1)],
            "timings_s": d.timings}, indent=2, default=lambda x: None))
    elif fmt == "csv":
        out = ["rank,ref,role,family,value"]
        for i, r in enumerate(d.ranked, 1):
            out += [f"{i},{row}" for row in bom_to_csv(r.bom).splitlines()[3:]]
        click.echo("\n".join(out))
    elif fmt == "yaml":
        click.echo("\n".join(bom_to_yaml(r.bom, header=f"rank {i} for {spec_path}") for i, r in enumerate(d.ranked, 1)))
    else:
        click.echo(f"{spec.name}: {len(d.passing)} of {len(d.ranked)} ranked candidates meet every requirement "
                   f"(ranked by {', '.join(keys or spec.rank_by)})")
        if not quiet:
            table = _design_table(d, cat, spec)
            if sys.stdout.isatty():  # colour only on a terminal
                table = table.replace(" pass ", " " + click.style("pass", fg="green") + " ").replace(
                    " FAIL ", " " + click.style("FAIL", fg="red") + " ")
            click.echo(table)
        if verbose:
            click.echo("time per stage: " + ", ".join(f"{k} {v:.2f} s" for k, v in d.timings.items()))
    if explain:
        click.echo("\nnot considered:", err=fmt != "text")
        for line in d.space.explain:
            click.echo(f"  {line}", err=fmt != "text")
    if report_path is not None:
        from partpick.export.report import render_report

        write_atomic(report_path, render_report(spec, d, cat), force=force)
        click.echo(f"wrote {report_path}", err=fmt != "text")
    if plots_dir is not None and d.ranked[0].mc is not None:
        from partpick.export.plots import histograms

        path = histograms(d.ranked[0].mc, spec, Path(plots_dir) / f"{spec.name}-01-histograms.png", force=force)
        click.echo(f"wrote {path}", err=fmt != "text")
    if out_dir is not None:
        for i, r in enumerate(d.ranked, 1):
            path = Path(out_dir) / f"{spec.name}-{i:02d}.yaml"
            s_ = _summary(r)
            note = (f"partpick design {spec_path}, rank {i}: {'meets' if s_['passed'] else 'misses'} the spec\n"
                    f"predicted {s_['frequency_hz']:.6g} Hz ({s_['frequency_error'] * 100:+.3f} %), "
                    f"{2 * s_['amplitude_load_peak_v']:.4g} Vpp at the load, THD {s_['thd'] * 100:.2f} %\n"
                    f"yield {s_['yield']:.1%} ({s_['samples']} Monte Carlo builds)")
            if r.worst:
                note += "\n" + _worst_line(r.worst)
            write_atomic(path, bom_to_yaml(r.bom, header=note), force=force)
            write_atomic(path.with_suffix(".csv"), bom_to_purchase_csv(r.bom, cat, builds=spec.builds), force=force)
            write_atomic(path.with_suffix(".json"), json.dumps(
                {"rank": i, **_summary(r), "checks": [_check_json(c) for c in r.verdict.checks],
                 "cautions": list(r.verdict.cautions),
                 "bom": [{"ref": ln.ref, "role": ln.role, "family": ln.family, "value": ln.value}
                         for ln in r.bom.lines]}, indent=2, default=lambda x: None), force=force)
        click.echo(f"wrote {len(d.ranked)} BOM file(s) to {out_dir}", err=fmt != "text")


# -- swap -------------------------------------------------------------------------------------

@main.command("swap")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@click.argument("bom_path", metavar="BOM", type=click.Path(path_type=Path))
@click.option("--stock", "stock_path", type=click.Path(path_type=Path), required=True, help="Stock list (CSV).")
@click.option("--all", "all_lines", is_flag=True, help="Refill every slot from the shelf, not only the missing ones.")
@_catalog_option
@click.option("--out", "out_path", type=click.Path(path_type=Path), default=None, help="Write the new BOM here.")
@click.option("--force", is_flag=True, help="Overwrite --out.")
@click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True)
@_guarded
def swap_cmd(spec_path, bom_path, stock_path, all_lines, catalog_paths, out_path, force, samples) -> None:
    """Replace the parts of BOM that are not on the shelf by stocked parts, re-verify, and
    print old against new. Exit 1 when no substitution meets SPEC."""
    from partpick.bom import ROLES, bom_to_yaml, load_bom
    from partpick.stock import load_stock
    from partpick.swap import swap

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    bom = load_bom(bom_path, cat)
    stock = load_stock(stock_path, cat)
    res = swap(spec, cat, bom, stock, all_lines=all_lines, samples=samples)
    if not res.changed:
        click.echo(f"every part of {bom_path} is on the shelf ({stock_path}); nothing to swap")
    rows = []
    for old, new in zip(res.before.bom.lines, res.after.bom.lines):
        dim = ROLES[old.role][1]
        fmt_v = (lambda v: units.format_quantity(v, dim, 3)) if dim else (lambda v: "")
        if (old.family, old.value) != (new.family, new.value):
            rows.append([old.ref, old.role, f"{fmt_v(old.value)} {old.family}".strip(),
                         f"{fmt_v(new.value)} {new.family}".strip(),
                         "on shelf" if stock.quantity(new.family, new.value) else ""])
    if rows:
        click.echo(render_table(["ref", "role", "was", "now", ""], rows))
        click.echo("")

    def col(r):
        p = r.verdict.nominal
        return [f"{p.freq_hz:.6g} Hz" if p.starts else "-", f"{2 * p.load_peak_v:.4g} Vpp",
                f"{p.lin.margin * 100:.2f} %", f"{r.yield_frac * 100:.1f} %", f"{r.cost:.3f}",
                "meets the spec" if r.verdict.passed else "FAILS " + ", ".join(c.name for c in r.verdict.failed())]

    names = ["frequency", "amplitude at load", "startup margin", "yield", f"cost {cat.currency}", "verdict"]
    click.echo(render_table(["", "before", "after"], [[n, a, b] for n, a, b in zip(names, col(res.before), col(res.after))]))
    if out_path is not None:
        write_atomic(out_path, bom_to_yaml(res.after.bom, header=f"partpick swap of {bom_path} to {stock_path}"),
                     force=force)
        click.echo(f"wrote {out_path}")


# -- tradeoff ---------------------------------------------------------------------------------

@main.command("tradeoff")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@_catalog_option
@click.option("--plots", "plots_dir", type=click.Path(path_type=Path), default=None,
              help="Draw the front as PNG (every design a dot, the front a line; needs the plot extra).")
@click.option("--force", is_flag=True, help="Overwrite the plot.")
@click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True)
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text", show_default=True)
@_guarded
def tradeoff_cmd(spec_path, catalog_paths, plots_dir, force, samples, fmt) -> None:
    """Cost against accuracy: the designs no other is both cheaper and more accurate than."""
    from partpick.tradeoff import tradeoff

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    progress = None
    if sys.stderr.isatty():
        def progress(done, total):
            click.echo(f"\rdesign runs: {done}/{total}", err=True, nl=done >= total)
    points, front = tradeoff(spec, cat, samples=samples, progress=progress)
    if not front:
        raise PartpickError("no design meets the spec with any allowed family pair; run `partpick design` for why")
    if fmt == "json":
        click.echo(json.dumps({"front": [{"cost": p.cost, "accuracy": p.accuracy, "yield": p.yield_frac,
                                          "families": p.families, "source": p.source,
                                          "bom": [{"ref": ln.ref, "role": ln.role, "family": ln.family,
                                                   "value": ln.value} for ln in p.item.bom.lines]} for p in front],
                               "evaluated": len(points)}, indent=2))
    else:
        click.echo(f"{spec.name}: {len(front)} designs on the cost-accuracy front, of {len(points)} that meet the spec")
        click.echo(render_table(
            [f"cost {cat.currency}", "accuracy", "yield", "arm families", "op-amp", "limiter", "from run"],
            [[f"{p.cost:.3f}", f"+/-{p.accuracy * 100:.3f} %", f"{p.yield_frac * 100:.1f} %", p.families,
              p.item.bom.line("opamp").family, p.item.bom.line("limiter").family, p.source] for p in front],
            right=(0, 1, 2)))
        click.echo(f"accuracy: frequency error the builds reach at the {spec.yield_min_frac:.0%} yield "
                   f"({samples} Monte Carlo builds each)")
    if plots_dir is not None:
        from partpick.export.plots import front_plot

        path = front_plot(points, front, spec, Path(plots_dir) / f"{spec.name}-tradeoff.png", force=force)
        click.echo(f"wrote {path}", err=fmt != "text")



# -- report -----------------------------------------------------------------------------------

@main.command("report")
@click.argument("spec_path", metavar="SPEC", type=click.Path(path_type=Path))
@_catalog_option
@click.option("-o", "--out", "out", type=click.Path(path_type=Path), default=None,
              help="HTML file (default: NAME-report.html beside the working folder).")
@click.option("--force", is_flag=True, help="Overwrite the report.")
@click.option("--samples", type=click.IntRange(100, 10_000_000), default=20_000, show_default=True)
@_guarded
def report_cmd(spec_path, catalog_paths, out, force, samples) -> None:
    """Design SPEC, compute its cost-accuracy front, and write one self-contained HTML page."""
    from partpick.design import design
    from partpick.export.report import render_report
    from partpick.tradeoff import tradeoff

    spec = Spec.from_yaml(spec_path)
    cat = _load_catalog(catalog_paths, spec)
    d = design(spec, cat, samples=samples)
    points, front = tradeoff(spec, cat, samples=samples)
    out = out or Path(f"{spec.name}-report.html")
    write_atomic(out, render_report(spec, d, cat, points=points, front=front), force=force)
    click.echo(f"wrote {out}")
