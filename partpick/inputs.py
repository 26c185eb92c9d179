"""Reading what a command works on, at the edge: the spec, the catalog it names (or the
default one) and its stock list, each checked against the others."""

from __future__ import annotations

from pathlib import Path

from partpick.catalog import Catalog, default_catalog_dir, load_catalog
from partpick.circuits import check_spec
from partpick.spec import Spec, check_parts
from partpick.stock import load_stock

__all__ = ["catalog_for", "load_inputs"]


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
    cat = catalog_for(catalog_paths, spec)
    check_parts(spec, cat)
    check_spec(spec)
    stock = load_stock(spec.stock.path, cat) if spec.stock else None
    return spec, cat, stock
