"""The files each command writes, named and checked before any computation.

``design --out DIR`` writes, per candidate, its BOM (YAML, headed with its
predictions), the purchasing CSV and a JSON of the candidate with its verdict;
``--plots DIR`` the top candidate's histograms; ``--report FILE`` the HTML report;
``tradeoff --plots DIR`` the front; ``report`` its page. Names partpick builds come
from the spec's name reduced to a safe stem (:func:`partpick.fileio.safe_stem`) and
stay inside the folder the user named. Every file of one command is checked first
(:class:`partpick.fileio.OutputPlan`), so a refusal writes nothing; when a write
fails midway, the files already written by the command are removed again.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from partpick.bom import bom_to_yaml
from partpick.export.purchase import bom_to_purchase_csv
from partpick.export.summary import bom_note, candidate_json
from partpick.fileio import OutputPlan, safe_stem
from partpick.inputs import require_extra

__all__ = ["DesignFiles", "plan_design", "write_design", "report_html", "write_candidates", "plan_one", "plan_tradeoff_plot",
           "plan_report", "writing"]

_EXTS = ("yaml", "csv", "json")


@dataclass
class DesignFiles:
    """Where ``design`` will write: the checked plan, the report, the histogram PNG and,
    per rank, its (yaml, csv, json) paths."""

    plan: OutputPlan
    report: Path | None = None
    plots: Path | None = None
    ranks: list[tuple[Path, Path, Path]] = field(default_factory=list)


def plan_design(spec, spec_path, *, out_dir, plots_dir, report_path, results: int, force: bool) -> DesignFiles:
    """Name and check every file ``design`` may write (ranks 1..results), and the
    optional extras the options need, before the search runs."""
    stem = safe_stem(spec.name, spec_path)
    files = DesignFiles(OutputPlan(force=force))
    if report_path is not None:
        require_extra("schemdraw", "--report", "report")
        files.report = files.plan.file(report_path, "--report")
    if plots_dir is not None:
        require_extra("matplotlib", "--plots", "plot")
        files.plots = files.plan.in_folder(plots_dir, f"{stem}-01-histograms.png", "--plots")
    if out_dir is not None:
        files.ranks = [tuple(files.plan.in_folder(out_dir, f"{stem}-{i:02d}.{ext}", "--out") for ext in _EXTS)
                       for i in range(1, results + 1)]
    files.plan.check()
    return files


def report_html(spec, d, catalog, *, stock=None, points=None, front=None) -> str:
    """The report page of design ``d`` (and the front, when given)."""
    from partpick.export.report import render_report
    from partpick.verify import nominal_spectrum

    best = d.ranked[0]
    spectrum = nominal_spectrum(best.circuit, best.verdict.nominal.cond)
    return render_report(spec, d, catalog, points=points, front=front, stock=stock, spectrum=spectrum)


def write_design(files: DesignFiles, d, spec, spec_path, catalog, *, stock=None) -> list[str]:
    """Write what :func:`plan_design` planned; returns 'wrote ...' lines."""
    said = []
    html = report_html(spec, d, catalog, stock=stock) if files.report is not None else None
    with writing(files.plan):
        if html is not None:
            said.append(f"wrote {files.plan.write(files.report, html)}")
        if files.plots is not None and d.ranked[0].mc is not None:
            from partpick.export.plots import histograms

            said.append(f"wrote {files.plan.done(histograms(d.ranked[0].mc, spec, files.plots, force=files.plan.force))}")
        if files.ranks:
            write_candidates(d, spec, spec_path, catalog, plan=files.plan, paths=files.ranks)
            said.append(f"wrote {len(d.ranked)} BOM file(s) to {files.ranks[0][0].parent}")
    return said


def write_candidates(d, spec, spec_path, catalog, out_dir=None, *, force: bool = False, stock=None,
                     plan: OutputPlan | None = None, paths=None) -> list[Path]:
    """Write the three files of every ranked candidate of ``d`` (into ``out_dir``, or to
    the planned ``paths``); returns the paths written."""
    if plan is None:
        files = plan_design(spec, spec_path, out_dir=out_dir, plots_dir=None, report_path=None,
                            results=len(d.ranked), force=force)
        plan, paths = files.plan, files.ranks
    written = []
    with writing(plan):
        for i, (r, (yaml_path, csv_path, json_path)) in enumerate(zip(d.ranked, paths), 1):
            written.append(plan.write(yaml_path, bom_to_yaml(r.bom, header=bom_note(spec_path, i, r), catalog=catalog)))
            written.append(plan.write(csv_path, bom_to_purchase_csv(r.bom, catalog, stock=stock, builds=spec.builds)))
            written.append(plan.write(json_path, candidate_json(i, r)))
    return written


def plan_one(path, option: str, *, force: bool) -> tuple[OutputPlan, Path]:
    """A checked plan of one file the user named (``-o``, ``--out``, ``init PATH``)."""
    plan = OutputPlan(force=force)
    path = plan.file(path, option)
    plan.check()
    return plan, path


def plan_tradeoff_plot(spec, spec_path, plots_dir, *, force: bool) -> tuple[OutputPlan, Path]:
    """The front's PNG in ``plots_dir``, checked, with matplotlib present."""
    require_extra("matplotlib", "--plots", "plot")
    plan = OutputPlan(force=force)
    path = plan.in_folder(plots_dir, f"{safe_stem(spec.name, spec_path)}-tradeoff.png", "--plots")
    plan.check()
    return plan, path


def plan_report(spec, spec_path, out, *, force: bool) -> tuple[OutputPlan, Path]:
    """The report page: ``out``, or NAME-report.html in the working folder; checked,
    with schemdraw present."""
    require_extra("schemdraw", "--out", "report")
    if out is not None:
        return plan_one(out, "--out", force=force)
    plan = OutputPlan(force=force)
    path = plan.in_folder(".", f"{safe_stem(spec.name, spec_path)}-report.html", "--out")
    plan.check()
    return plan, path


class writing:
    """``with writing(plan):`` removes the files the plan wrote when anything fails
    (an error, Ctrl-C, SIGTERM), so a command leaves all its files or none."""

    def __init__(self, plan: OutputPlan) -> None:
        self.plan = plan

    def __enter__(self) -> OutputPlan:
        return self.plan

    def __exit__(self, kind, exc, tb) -> bool:
        if kind is not None:
            self.plan.rollback()
        return False
