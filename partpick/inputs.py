"""Reading what a command works on, at the edge: the spec, the catalog it names (or the
default one), its stock list and a BOM, each checked against the others; and the
command's options, each checked against a sane range before any computation."""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import numpy as np

from partpick.bom import Bom, check_bom_fits, load_bom, value_text
from partpick.catalog import Catalog, default_catalog_dir, load_catalog
from partpick.circuits import check_spec
from partpick.errors import InputError, SpecError
from partpick.spec import RANK_KEYS, Spec, check_parts
from partpick.stock import load_stock
from partpick.yamlsrc import did_you_mean

__all__ = ["catalog_for", "load_inputs", "load_bom_for", "check_number", "check_seed", "check_samples",
           "rank_keys", "require_extra", "physics_of", "SEED_MAX", "SAMPLES", "CYCLES"]


def catalog_for(paths, spec: Spec | None = None) -> Catalog:
    """The catalog from ``paths`` when given, else the spec's ``catalogs``, else the
    default folder ($PARTPICK_CATALOGS, ./catalogs, or the shipped demo catalog)."""
    if paths:
        return load_catalog(list(paths))
    if spec is not None and spec.catalogs:
        return load_catalog(list(spec.catalogs))
    return load_catalog([default_catalog_dir()])


def load_inputs(spec_path: str | Path, catalog_paths=()):
    """(spec, catalog, stock list or None), validated against each other and against
    the circuit registry."""
    spec = Spec.from_yaml(spec_path)
    with _named_by(spec, "catalogs", None if catalog_paths else "catalogs"):
        cat = catalog_for(catalog_paths, spec)
    check_parts(spec, cat)
    check_spec(spec)
    with _named_by(spec, "stock", "stock.file" if spec.stock else None):
        stock = load_stock(spec.stock.path, cat) if spec.stock else None
    return spec, cat, stock


class _named_by:
    """A file the spec names that cannot be read (missing, a folder, a FIFO ...) is
    refused at the spec's line that names it; an error inside the file keeps its own
    file and line."""

    def __init__(self, spec: Spec, key: str, field: str | None) -> None:
        self.spec, self.key, self.field = spec, key, field

    def __enter__(self) -> None:
        return None

    def __exit__(self, kind, exc, tb) -> bool:
        if self.field is not None and isinstance(exc, InputError) and exc.line is None and exc.source:
            raise SpecError(f"names {exc.source}, which {_as_clause(exc.message)}", source=self.spec.source,
                            line=self.spec.line_of(self.key), field=self.field) from None
        return False


def _as_clause(message: str) -> str:
    """'file not found' -> 'is not found'; 'is a directory ...' stays."""
    for old, new in (("file not found", "is not found"), ("catalog folder or file not found", "is not found"),
                     ("cannot read file", "cannot be read"), ("cannot read catalog folder or file", "cannot be read")):
        if message.startswith(old):
            return new + message[len(old):]
    return message


# -- options, checked before any computation ------------------------------------------------------

SEED_MAX = 2**31 - 2           # the solver's seed is a signed 32-bit integer, and the Monte Carlo's is seed + 1
SAMPLES = (100, 1_000_000)     # Monte Carlo builds per candidate
# Measured on this machine with 1,000,000 builds: design of the LVDT demo spec with -n 10 peaks at
# 490 MB, tradeoff of the 50 kHz carrier at 510 MB, report at 610 MB. About 28 bytes per build are
# kept for each verified candidate (n results + about 5 more the search verifies) on top of some
# 250 MB of code and search; this budget keeps a run under 1 GB.
SAMPLE_BUDGET = 25_000_000
CYCLES = (1.0, 100_000.0)


def _option(name: str, message: str) -> InputError:
    return InputError(message, field=name)


def check_number(name: str, value: float | None, bounds: tuple[float, float], unit: str = "") -> None:
    """Refuse an option value that is NaN, infinite or outside ``bounds`` (inclusive)."""
    if value is None:
        return
    if not (math.isfinite(value) and bounds[0] <= value <= bounds[1]):
        lo, hi, got = (_plain(x) for x in (bounds[0], bounds[1], value))
        raise _option(name, f"must lie within {lo} .. {hi}{unit} (got {got})")


def _plain(x: float) -> str:
    """1000000 rather than 1e+06 for whole numbers an option takes."""
    return str(int(x)) if math.isfinite(x) and float(x).is_integer() and abs(x) < 1e12 else f"{x:g}"


def check_seed(seed: int | None) -> None:
    if seed is not None and not 0 <= seed <= SEED_MAX:
        raise _option("--seed", f"must lie within 0 .. {SEED_MAX} (got {seed})")


def check_samples(samples: int | None, results: int = 1) -> None:
    """Refuse a Monte Carlo size below a stable estimate or beyond the memory budget."""
    if samples is None:
        return
    check_number("--samples", samples, SAMPLES)
    most = SAMPLE_BUDGET // (results + 5)
    if samples > most:
        raise _option("--samples", f"{samples} builds for each of {results} results would need over 1 GB of "
                                   f"memory; use at most {most} (or fewer results)")


def rank_keys(text: str | None) -> tuple[str, ...] | None:
    """``--rank-by a,b`` as a tuple of known, distinct keys (None when not given)."""
    if text is None:
        return None
    keys = tuple(k.strip() for k in text.split(","))
    for key in keys:
        if key not in RANK_KEYS:
            raise _option("--rank-by", f"has unknown key '{key}'; expected {', '.join(RANK_KEYS)}"
                          + did_you_mean(key, RANK_KEYS))
        if keys.count(key) > 1:
            raise _option("--rank-by", f"lists '{key}' twice")
    return keys


def require_extra(module: str, option: str, extra: str) -> None:
    """Refuse an option whose optional dependency is not installed, before any computation."""
    if importlib.util.find_spec(module) is None:
        raise _option(option, f"needs {module}: pip install 'partpick[{extra}]'")


def load_bom_for(bom_path: str | Path, spec: Spec, catalog: Catalog) -> Bom:
    """The BOM at ``bom_path``, checked against the catalog and against the spec it is
    checked with (same topology, same supply kind)."""
    bom = load_bom(bom_path, catalog)
    check_bom_fits(bom, spec)
    return bom


class physics_of:
    """``with physics_of(bom):`` turns a numerical failure of the physics on a BOM read
    from a file (a singular loop, an overflow, a transient that cannot start, a math
    domain error) into one line naming the BOM and its parts with their values, exit 2:
    the values are what the physics cannot take. Inputs are range-checked on the way
    in, so this is the last guard, not the first."""

    def __init__(self, bom: Bom) -> None:
        self.bom = bom

    def __enter__(self) -> Bom:
        return self.bom

    def __exit__(self, kind, exc, tb) -> bool:
        numeric = (ArithmeticError, np.linalg.LinAlgError)
        if isinstance(exc, numeric) or (type(exc) is ValueError):
            parts = ", ".join(f"{ln.ref} {value_text(ln) or ln.family}" for ln in self.bom.lines)
            raise InputError(f"the physics cannot analyse this circuit ({type(exc).__name__}: {exc}); its parts: "
                             f"{parts}", source=self.bom.source or None) from exc
        return False
