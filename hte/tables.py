"""Shipped series tables (``tables/*.json``): lookup, format check and provenance.

A table is the JSON document of ``hte series`` (CONVENTIONS.md, per site) plus a ``provenance`` block:
format version, hte version, the command that made it, the lattice file's sha256, the convention, wall time
and machine.  A table answers a request when lattice (name and file hash), model, spins, couplings and
occupations are the same and its order is at least the requested one; the answer is truncated to the request.
"""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

from hte.errors import TableMismatchError

TABLE_FORMAT = 1
TABLES_DIR = Path(__file__).resolve().parents[1] / "tables"


def _normal_spin(spin: dict) -> dict:
    return {k: str(Fraction(str(v))) for k, v in spin.items()}


def _normal_values(values: dict) -> dict:
    out = {}
    for k, v in values.items():
        try:
            out[k] = str(Fraction(str(v)))
        except (ValueError, ZeroDivisionError):
            out[k] = str(v)
    return out


def table_paths(directory: Path = TABLES_DIR) -> list[Path]:
    return sorted(directory.glob("*.json")) if directory.is_dir() else []


def read_table(path: Path) -> dict:
    """Load a table and check its format version."""
    try:
        doc = json.loads(Path(path).read_text())
    except (OSError, json.JSONDecodeError) as exc:
        raise TableMismatchError(f"{path}: cannot read the series table ({exc}); rebuild it with "
                                 "scripts/make_tables or delete it") from None
    version = doc.get("provenance", {}).get("format")
    if version != TABLE_FORMAT:
        raise TableMismatchError(f"{path}: table format {version!r}, this hte reads format {TABLE_FORMAT}; "
                                 "rebuild it with scripts/make_tables")
    return doc


def find_table(spec, model, order: int, directory: Path = TABLES_DIR):
    """The table document answering the request (truncated to `order`), or None."""
    if model.symbolic:
        return None
    couplings = {}
    for label, c in model.couplings.items():
        if c.is_zero:
            continue
        if c.xy == c.z:
            couplings[label] = str(c.xy)
        else:
            couplings[f"{label}.xy"], couplings[f"{label}.z"] = str(c.xy), str(c.z)
    if any(d != 0 for d in model.anisotropy.values()):
        return None
    want = {
        "lattice": spec.name,
        "model": model.kind,
        "spin": _normal_spin(model.spin),
        "couplings": couplings,
        "occupation": _normal_values(model.occupation),
    }
    for path in table_paths(directory):
        doc = read_table(path)
        try:
            have_couplings = {k: v for k, v in _normal_values(doc["couplings"]).items() if Fraction(v) != 0}
        except (ValueError, ZeroDivisionError):
            continue  # a symbolic table never answers a numeric request
        if (doc["lattice"] != want["lattice"] or doc["model"] != want["model"]
                or _normal_spin(doc["spin"]) != want["spin"] or have_couplings != want["couplings"]
                or _normal_values(doc["occupation"]) != want["occupation"] or doc["order"] < order):
            continue
        if doc["provenance"].get("lattice_sha256") != spec.sha256:
            raise TableMismatchError(
                f"{path} was built from a different {spec.name} lattice file (sha256 differs); rebuild it with "
                f"`scripts/make_tables {spec.name}` or run with --no-tables")
        return doc, path
    return None
