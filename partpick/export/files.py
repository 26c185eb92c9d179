"""The files ``partpick design --out DIR`` writes: per candidate its BOM (YAML, headed
with its predictions), the purchasing CSV and a JSON of the candidate with its verdict."""

from __future__ import annotations

from pathlib import Path

from partpick.bom import bom_to_yaml
from partpick.export.purchase import bom_to_purchase_csv
from partpick.export.summary import bom_note, candidate_json
from partpick.fileio import write_atomic

__all__ = ["write_candidates"]


def write_candidates(d, spec, spec_path, catalog, out_dir, *, force: bool = False, stock=None) -> list[Path]:
    """Write the three files of every ranked candidate of ``d`` into ``out_dir``;
    returns the paths written."""
    written = []
    for i, r in enumerate(d.ranked, 1):
        path = Path(out_dir) / f"{spec.name}-{i:02d}.yaml"
        written.append(write_atomic(path, bom_to_yaml(r.bom, header=bom_note(spec_path, i, r), catalog=catalog), force=force))
        written.append(write_atomic(path.with_suffix(".csv"),
                                    bom_to_purchase_csv(r.bom, catalog, stock=stock, builds=spec.builds),
                                    force=force))
        written.append(write_atomic(path.with_suffix(".json"), candidate_json(i, r), force=force))
    return written
