"""Lattice definition files (TOML): locate, read and validate them, and build a :class:`LatticeSpec`.

A lattice file states the name, dimension, a one-line summary and a literature source; the primitive vectors
(Cartesian, ``[cell]``); the basis sites with fractional positions and a site class (``[sites]``); the bonds,
each with a coupling label, either listed as pairs (site -> site in the cell shifted by an integer offset) or
generated from a shell of neighbour distances (``[[bonds]]``); default couplings, occupations and spins; and an
optional ``[expect]`` block (coordination and bond length per label) that the loader checks.  README.md
documents the format with a complete example; ``lattices/*.toml`` are the built-in lattices.

Every mistake raises :class:`hte.errors.LatticeFileError` naming the file and the entry, what is wrong and how
to fix it.  Numbers may be written as TOML numbers or as strings with a simple expression such as
``"sqrt(3)/2"`` or ``"1/3"`` (+ - * / ** and sqrt only).
"""

from __future__ import annotations

import ast
import difflib
import hashlib
import math
import re
import tomllib
from dataclasses import replace
from fractions import Fraction
from pathlib import Path
from typing import NoReturn

import numpy as np

from hte.errors import LatticeFileError, ParameterError
from hte.lattice import Bond, LatticeSpec, Site, canonical_bond

LATTICE_DIR = Path(__file__).resolve().parents[1] / "lattices"
"""Folder of the built-in lattice files (``lattices/`` at the repository root)."""

DEFAULT_SITE_CLASS = "magnetic"
DEFAULT_SPIN = "1/2"
DEFAULT_TOLERANCE = 1e-6
"""Default tolerance (length unit of the file) for grouping distances into shells and matching distances."""

_TOP_KEYS = ("name", "dimension", "summary", "source", "cell", "sites", "bonds", "couplings", "occupation",
             "spin", "expect")
_REQUIRED_TOP_KEYS = ("name", "dimension", "cell", "sites", "bonds")
_SITE_KEYS = ("position", "class")
_BOND_KEYS = ("label", "pairs", "shell", "distance", "between", "tolerance")
_EXPECT_KEYS = ("coordination", "bond_length")
_POSITION_MODES = ("fractional", "cartesian")
_IDENTIFIER = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")


# ---------------------------------------------------------------------------------------------- public API
def builtin_lattices() -> list[str]:
    """Names of the built-in lattices (the files ``lattices/<name>.toml``), sorted."""
    return sorted(p.stem for p in LATTICE_DIR.glob("*.toml"))


def load_lattice(name_or_path) -> LatticeSpec:
    """Read and validate a lattice file; return its :class:`LatticeSpec`.

    Parameters
    ----------
    name_or_path : str or os.PathLike
        A built-in name such as ``"kagome"`` (see :func:`builtin_lattices`), or the path of a lattice file.
        A string containing a path separator or ending in ``.toml`` is a path; other strings are built-in names.

    Returns
    -------
    LatticeSpec
        Positions in Cartesian coordinates (length unit of the file), one canonical bond per translation class,
        ``path`` = the absolute path of the file and ``sha256`` = the SHA-256 of its bytes.

    Raises
    ------
    ParameterError
        If a name is neither a built-in lattice nor a path.
    LatticeFileError
        If the file cannot be read or is malformed or inconsistent.
    """
    path = _resolve(name_or_path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise LatticeFileError(f"{path}: cannot read the lattice file ({exc.strerror}); check the path") from exc
    where = str(path)
    try:
        document = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise LatticeFileError(f"{where}: not UTF-8 text (byte {exc.start}); save the file as UTF-8") from exc
    except tomllib.TOMLDecodeError as exc:
        raise LatticeFileError(f"{where}: TOML syntax error: {exc}; fix the file at that place") from exc
    spec = _LatticeFileReader(where, document).build()
    return replace(spec, path=str(path), sha256=hashlib.sha256(raw).hexdigest())


def _resolve(name_or_path) -> Path:
    if not isinstance(name_or_path, str):
        return Path(name_or_path).resolve()
    text = name_or_path
    if "/" in text or "\\" in text or text.endswith(".toml"):
        path = Path(text).expanduser()
        if not path.is_file():
            raise LatticeFileError(f"{text}: no such lattice file; check the path, or give a built-in name "
                                   f"({', '.join(builtin_lattices())})")
        return path.resolve()
    if text in builtin_lattices():
        return LATTICE_DIR / f"{text}.toml"
    hint = difflib.get_close_matches(text, builtin_lattices(), n=1)
    suggestion = f'did you mean "{hint[0]}"? ' if hint else ""
    raise ParameterError(f'unknown lattice "{text}": {suggestion}built-in lattices are '
                         f"{', '.join(builtin_lattices())}; for your own file give its path (e.g. ./{text}.toml)")


# ---------------------------------------------------------------------------------------------- values
def _describe(value) -> str:
    """How a TOML value reads in an error message."""
    if isinstance(value, bool):
        return f"the boolean {str(value).lower()}"
    if isinstance(value, str):
        return f'the string "{value}"'
    if isinstance(value, (int, float)):
        return f"the number {value}"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "a list"
    return f"a {type(value).__name__}"


def _evaluate(expression: str) -> float:
    """Value of a small arithmetic expression: numbers, + - * / **, parentheses and sqrt(...)."""

    def walk(node):
        if isinstance(node, ast.Expression):
            return walk(node.body)
        if isinstance(node, ast.Constant) and type(node.value) in (int, float):
            return node.value
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            operand = walk(node.operand)
            return -operand if isinstance(node.op, ast.USub) else operand
        if isinstance(node, ast.BinOp):
            operators = {ast.Add: lambda a, b: a + b, ast.Sub: lambda a, b: a - b, ast.Mult: lambda a, b: a * b,
                         ast.Div: lambda a, b: a / b, ast.Pow: lambda a, b: a**b}
            if type(node.op) in operators:
                return operators[type(node.op)](walk(node.left), walk(node.right))
        if (isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "sqrt"
                and len(node.args) == 1 and not node.keywords):
            return math.sqrt(walk(node.args[0]))
        raise ValueError("unsupported")

    try:
        value = float(walk(ast.parse(expression.strip(), mode="eval")))
    except (SyntaxError, ValueError, ZeroDivisionError, OverflowError, TypeError) as exc:
        raise ValueError(expression) from exc
    if not math.isfinite(value):
        raise ValueError(expression)
    return value


def _format_number(x: float) -> str:
    return f"{x:.6g}"


# ---------------------------------------------------------------------------------------------- reader
class _LatticeFileReader:
    """Validates one parsed lattice file, section by section, and builds the :class:`LatticeSpec`."""

    def __init__(self, where: str, document: dict):
        self.where = where
        self.document = document

    # ---------------------------------------------------------------- messages
    def fail(self, context: str, message: str) -> NoReturn:
        prefix = f"{self.where}, {context}" if context else self.where
        raise LatticeFileError(f"{prefix}: {message}")

    def check_keys(self, table: dict, allowed, context: str, what: str):
        for key in table:
            if key not in allowed:
                hint = difflib.get_close_matches(key, allowed, n=1)
                suggestion = f'did you mean "{hint[0]}"? ' if hint else ""
                self.fail(context, f'unknown key "{key}" in {what}; {suggestion}allowed keys are '
                                   f"{', '.join(allowed)}")

    def table(self, value, context: str, example: str) -> dict:
        if not isinstance(value, dict):
            self.fail(context, f"expected a table (e.g. {example}), got {_describe(value)}")
        return value

    def number(self, value, context: str) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            self.fail(context, f'expected a number or a formula string such as "sqrt(3)/2", got {_describe(value)}')
        if isinstance(value, str):
            try:
                return _evaluate(value)
            except ValueError:
                self.fail(context, f'cannot read the formula "{value}"; use numbers, + - * / ** and sqrt(...), '
                                   f'e.g. "sqrt(3)/2"')
        if not math.isfinite(value):
            self.fail(context, f"expected a finite number, got {value}")
        return float(value)

    def vector(self, value, length: int, context: str, what: str) -> tuple[float, ...]:
        if not isinstance(value, list):
            self.fail(context, f"{what} must be a list of {length} numbers, got {_describe(value)}")
        if len(value) != length:
            self.fail(context, f"{what} has {len(value)} components but needs {length}; give {length} numbers")
        return tuple(self.number(x, f"{context}, component {k + 1}") for k, x in enumerate(value))

    def name_like(self, value, context: str, what: str) -> str:
        if not isinstance(value, str) or not _IDENTIFIER.match(value):
            self.fail(context, f"{what} must be a name made of letters, digits and _ that starts with a letter "
                               f"(e.g. J2), got {_describe(value)}")
        return value

    # ---------------------------------------------------------------- sections
    def build(self) -> LatticeSpec:
        document = self.document
        self.check_keys(document, _TOP_KEYS, "", "the file")
        for key in _REQUIRED_TOP_KEYS:
            if key not in document:
                self.fail("", f'the required key "{key}" is missing; add it (see the lattice file format in README.md)')
        name = document["name"]
        if not isinstance(name, str) or not name.strip():
            self.fail("name", f"expected a non-empty string, got {_describe(name)}")
        for key in ("summary", "source"):
            if not isinstance(document.get(key, ""), str):
                self.fail(key, f"expected a string, got {_describe(document[key])}")
        dimension = document["dimension"]
        if isinstance(dimension, bool) or dimension not in (1, 2, 3):
            self.fail("dimension", f"expected the integer 1, 2 or 3, got {_describe(dimension)}")
        self.dimension = dimension
        vectors, cartesian_positions = self.read_cell(document["cell"])
        sites = self.read_sites(document["sites"], vectors, cartesian_positions)
        site_classes = tuple(dict.fromkeys(s.site_class for s in sites))
        geometry = LatticeSpec(name=name, dimension=dimension, vectors=vectors, sites=sites, bonds=(), labels=(),
                               site_classes=site_classes)
        self.check_distinct_points(geometry)
        bonds, labels = self.read_bonds(document["bonds"], geometry)
        spec = LatticeSpec(
            name=name, dimension=dimension, vectors=vectors, sites=sites, bonds=bonds, labels=labels,
            site_classes=site_classes,
            couplings=self.read_couplings(document.get("couplings", {}), labels),
            occupation=self.read_occupation(document.get("occupation", {}), site_classes),
            spin=self.read_spin(document.get("spin", {}), site_classes),
            summary=document.get("summary", ""), source=document.get("source", ""),
        )
        self.check_connected(spec)
        self.check_expectations(document.get("expect", {}), spec)
        return spec

    def read_cell(self, cell) -> tuple[tuple[tuple[float, ...], ...], bool]:
        d = self.dimension
        names = [f"a{k + 1}" for k in range(d)]
        cell = self.table(cell, "[cell]", "a1 = [1.0, 0.0]")
        self.check_keys(cell, [*names, "positions"], "[cell]",
                        f"[cell] of a {d}-dimensional lattice (it needs exactly the primitive vectors "
                        f"{', '.join(names)})")
        missing = [n for n in names if n not in cell]
        if missing:
            self.fail("[cell]", f"wrong number of primitive vectors: dimension = {d} needs {', '.join(names)}, "
                                f"but {', '.join(missing)} is missing; add it")
        mode = cell.get("positions", "fractional")
        if mode not in _POSITION_MODES:
            self.fail("[cell] positions", f'expected "fractional" (the default) or "cartesian", got {_describe(mode)}')
        for n in names:
            if not isinstance(cell[n], list):
                self.fail(f"[cell] {n}", f"expected a list of numbers, got {_describe(cell[n])}")
        space = len(cell["a1"])
        lengths_ok = (space == d) if mode == "fractional" else (d <= space <= 3)
        if not lengths_ok:
            self.fail("[cell] a1", f"a1 has {space} components but the lattice has dimension {d}; give {d} "
                                   f"components (a {d}-dimensional lattice drawn in a larger space, such as a ladder "
                                   f'in the plane, needs positions = "cartesian" in [cell] and up to 3 components)')
        vectors = tuple(self.vector(cell[n], space, f"[cell] {n}", n) for n in names)
        matrix = np.asarray(vectors)
        singular_values = np.linalg.svd(matrix, compute_uv=False)
        if singular_values[-1] <= 1e-9 * max(singular_values[0], 1e-300):
            self.fail("[cell]", f"the primitive vectors {', '.join(names)} are linearly dependent (the cell has "
                                f"zero volume); give {d} independent vectors")
        return vectors, mode == "cartesian"

    def read_sites(self, sites, vectors, cartesian_positions: bool) -> tuple[Site, ...]:
        sites = self.table(sites, "[sites]", "A = [0.0, 0.0]")
        if not sites:
            self.fail("[sites]", "no sites are defined; add at least one, e.g. A = [0.0, 0.0]")
        matrix = np.asarray(vectors)
        length = matrix.shape[1] if cartesian_positions else self.dimension
        kind = "Cartesian" if cartesian_positions else "fractional"
        result = []
        for site_name, entry in sites.items():
            context = f'[sites] "{site_name}"'
            site_class = DEFAULT_SITE_CLASS
            if isinstance(entry, dict):
                self.check_keys(entry, _SITE_KEYS, context, "a site")
                if "position" not in entry:
                    self.fail(context, "the site has no position; add position = [...] (fractional coordinates)")
                site_class = self.name_like(entry.get("class", DEFAULT_SITE_CLASS), f"{context} class", "a site class")
                entry = entry["position"]
            elif not isinstance(entry, list):
                self.fail(context, f"expected a position list such as [0.0, 0.5] or a table "
                                   f'{{ position = [...], class = "..." }}, got {_describe(entry)}')
            coordinates = np.asarray(self.vector(entry, length, context, f"the {kind} position"))
            position = coordinates if cartesian_positions else coordinates @ matrix
            result.append(Site(site_name, tuple(float(x) for x in position), site_class))
        return tuple(result)

    def check_distinct_points(self, geometry: LatticeSpec):
        for distance, pair in geometry.pairs_within(DEFAULT_TOLERANCE):
            first, second = geometry.sites[pair.source].name, geometry.sites[pair.target].name
            self.fail("[sites]", f'sites "{first}" and "{second}" (cell offset {list(pair.offset)}) are at the same '
                                 f"point (distance {distance:.3g}), so a bond between them would have zero length; "
                                 f"move one of them or remove it")

    # ---------------------------------------------------------------- bonds
    def read_bonds(self, entries, geometry: LatticeSpec) -> tuple[tuple[Bond, ...], tuple[str, ...]]:
        if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries) or not entries:
            self.fail("[[bonds]]", "expected one or more [[bonds]] tables, each with a label and pairs, shell or "
                                   "distance")
        labels = [e.get("label") for e in entries]
        seen: dict[tuple, str] = {}
        bonds: list[Bond] = []
        for number, entry in enumerate(entries, start=1):
            if "label" not in entry:
                self.fail(f"[[bonds]] entry {number}", 'the entry has no label; add label = "J1" (or another name)')
            label = self.name_like(entry["label"], f"[[bonds]] entry {number}", "the label")
            context = f'[[bonds]] label "{label}"' + (f" (entry {number})" if labels.count(label) > 1 else "")
            self.check_keys(entry, _BOND_KEYS, context, "a [[bonds]] entry")
            ways = [k for k in ("pairs", "shell", "distance") if k in entry]
            if len(ways) != 1:
                self.fail(context, "give exactly one of pairs = [...], shell = N or distance = X "
                                   f"(found {', '.join(ways) if ways else 'none'})")
            if ways[0] == "pairs":
                for k in ("between", "tolerance"):
                    if k in entry:
                        self.fail(context, f'"{k}" applies to shell and distance entries only; remove it')
                new = self.read_pairs(entry["pairs"], label, context, geometry)
            else:
                new = self.read_shell(entry, label, context, geometry)
            for bond, bond_context in new:
                key = (bond.source, bond.target, bond.offset)
                if key in seen:
                    self.fail(bond_context, f"this bond is already given by {seen[key]} (a bond written from its "
                                            f"other end, with the opposite offset, is the same bond); each bond "
                                            f"must appear once: remove one of them")
                seen[key] = bond_context
                bonds.append(bond)
        return tuple(bonds), tuple(dict.fromkeys(b.label for b in bonds))

    def read_pairs(self, pairs, label: str, context: str, geometry: LatticeSpec) -> list[tuple[Bond, str]]:
        names = [s.name for s in geometry.sites]
        d = self.dimension
        if not isinstance(pairs, list) or not pairs:
            self.fail(context, f'pairs must be a non-empty list of ["from", "to", [offset]] entries, got '
                               f"{_describe(pairs)}")
        result = []
        for number, pair in enumerate(pairs, start=1):
            where = f"{context}, pair {number}"
            if not isinstance(pair, list) or len(pair) not in (2, 3):
                self.fail(where, f'expected ["from", "to", [offset]] (offset of the "to" site in units of the '
                                 f"primitive vectors; may be left out when zero), got {_describe(pair)}")
            source, target = pair[0], pair[1]
            offset = pair[2] if len(pair) == 3 else [0] * d
            for end in (source, target):
                if not isinstance(end, str):
                    self.fail(where, f"site names must be strings, got {_describe(end)}")
            where = f'{where} ("{source}" -> "{target}")'
            for end in (source, target):
                if end not in names:
                    self.fail(where, f'site "{end}" is not defined; defined sites are {", ".join(names)}. '
                                     f"Add {end} under [sites] or fix the pair")
            if (not isinstance(offset, list) or len(offset) != d
                    or any(isinstance(n, bool) or not isinstance(n, int) for n in offset)):
                self.fail(where, f"the cell offset must be a list of {d} integers, got "
                                 f"{offset if isinstance(offset, list) else _describe(offset)}")
            i, j = names.index(source), names.index(target)
            if i == j and not any(offset):
                self.fail(where, f'bond from site "{source}" to itself in the same cell; a bond to its own '
                                 f"translate needs a non-zero cell offset, e.g. {[1] + [0] * (d - 1)}")
            result.append((canonical_bond(label, i, j, offset),
                           f'{context}, pair {number} ("{source}" -> "{target}", offset {offset})'))
        return result

    def read_shell(self, entry: dict, label: str, context: str, geometry: LatticeSpec) -> list[tuple[Bond, str]]:
        between = entry.get("between", [DEFAULT_SITE_CLASS, DEFAULT_SITE_CLASS])
        if not isinstance(between, list) or len(between) != 2 or not all(isinstance(c, str) for c in between):
            self.fail(f"{context}, between", f'expected two site classes such as ["magnetic", "interlayer"], got '
                                             f"{_describe(between)}")
        for site_class in between:
            if site_class not in geometry.site_classes:
                self.fail(f"{context}, between", f'no site has class "{site_class}"; site classes are '
                                                 f"{', '.join(geometry.site_classes)} (the default is "
                                                 f'["{DEFAULT_SITE_CLASS}", "{DEFAULT_SITE_CLASS}"])')
        tolerance = self.number(entry.get("tolerance", DEFAULT_TOLERANCE), f"{context}, tolerance")
        if tolerance <= 0:
            self.fail(f"{context}, tolerance", f"must be positive, got {tolerance}")
        classes = f"{between[0]}-{between[1]}"
        if "shell" in entry:
            shell = entry["shell"]
            if isinstance(shell, bool) or not isinstance(shell, int) or shell < 1:
                self.fail(f"{context}, shell", f"expected a positive integer (1 = nearest neighbours), got "
                                               f"{_describe(shell)}")
            distance = self.shell_distance(geometry, tuple(between), shell, tolerance, context)
            where = f"{context}, shell {shell}"
        else:
            distance = self.number(entry["distance"], f"{context}, distance")
            if distance <= 0:
                self.fail(f"{context}, distance", f"must be positive, got {_format_number(distance)}")
            where = f"{context}, distance {_format_number(distance)}"
        found = [b for r, b in geometry.pairs_within(distance + tolerance, tuple(between))
                 if abs(r - distance) <= tolerance]
        if not found:
            nearby = sorted({round(r, 6) for r, _ in geometry.pairs_within(2 * distance + 1.0, tuple(between))})[:6]
            self.fail(where, f"no pair of {classes} sites is at distance {_format_number(distance)} +- "
                             f"{tolerance:g}; the distances that occur are {', '.join(map(_format_number, nearby))}, "
                             f"...; fix the distance or the tolerance")
        return [(canonical_bond(label, b.source, b.target, b.offset),
                 f'{where} (bond "{geometry.sites[b.source].name}" -> "{geometry.sites[b.target].name}", '
                 f"offset {list(b.offset)})") for b in found]

    def shell_distance(self, geometry: LatticeSpec, between, shell: int, tolerance: float, context: str) -> float:
        """The distance of the `shell`-th shell of neighbours between the two site classes."""
        radius = float(max(np.linalg.norm(np.asarray(geometry.vectors), axis=1)))
        for _ in range(8):
            shells: list[float] = []
            for r, _ in geometry.pairs_within(radius, between):
                if r > radius - tolerance:
                    break
                if not shells or r - shells[-1] > tolerance:
                    shells.append(r)
            if len(shells) >= shell:
                return shells[shell - 1]
            radius *= 2
        self.fail(f"{context}, shell {shell}", f"the shell finds no bond within distance {_format_number(radius)}; "
                                               "use a smaller shell number or an explicit distance")

    # ---------------------------------------------------------------- defaults
    def read_couplings(self, table, labels: tuple[str, ...]) -> dict:
        table = self.table(table, "[couplings]", "J1 = 1")
        for label, value in table.items():
            if label not in labels:
                self.fail(f"[couplings] {label}", f"no bond has this label; labels are {', '.join(labels)}")
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                self.fail(f"[couplings] {label}", f"expected a number, got {_describe(value)}")
        couplings = {label: table.get(label, 1 if k == 0 else 0) for k, label in enumerate(labels)}
        if couplings[labels[0]] == 0:
            self.fail(f"[couplings] {labels[0]}", "the first label is the reference coupling (the energy unit) and "
                                                  "cannot be 0; list a non-zero coupling first in [[bonds]]")
        return couplings

    def read_occupation(self, table, site_classes: tuple[str, ...]) -> dict:
        table = self.table(table, "[occupation]", "interlayer = 0")
        for site_class, value in table.items():
            if site_class not in site_classes:
                self.fail(f"[occupation] {site_class}", f"no site has this class; site classes are "
                                                        f"{', '.join(site_classes)}")
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 <= value <= 1:
                self.fail(f"[occupation] {site_class}", f"expected a probability between 0 and 1, got "
                                                        f"{_describe(value)}")
        return {c: table.get(c, 1) for c in site_classes}

    def read_spin(self, table, site_classes: tuple[str, ...]) -> dict:
        table = self.table(table, "[spin]", 'magnetic = "1/2"')
        spins = {}
        for site_class in site_classes:
            value = table.get(site_class, DEFAULT_SPIN)
            try:
                spin = Fraction(value) if not isinstance(value, bool) else None
            except (TypeError, ValueError):
                spin = None
            if spin is None or spin <= 0 or (2 * spin).denominator != 1:
                self.fail(f"[spin] {site_class}", f'expected a positive integer or half-integer such as "1/2", '
                                                  f'"1" or "3/2", got {_describe(value)}')
            spins[site_class] = str(spin)
        for site_class in table:
            if site_class not in site_classes:
                self.fail(f"[spin] {site_class}", f"no site has this class; site classes are {', '.join(site_classes)}")
        return spins

    # ---------------------------------------------------------------- global checks
    def check_connected(self, spec: LatticeSpec):
        connectivity = spec.connectivity()
        if connectivity.unreached_sites:
            names = ", ".join(f'"{spec.sites[i].name}"' for i in connectivity.unreached_sites)
            self.fail("[[bonds]]", f'the lattice is disconnected: no chain of bonds links site(s) {names} to site '
                                   f'"{spec.sites[0].name}"; add bonds that join them')
        if connectivity.translation_index == 0:
            self.fail("[[bonds]]", f"the lattice is disconnected: the bonds never link cells along some direction, "
                                   f"so the {spec.dimension}-dimensional lattice falls apart into infinitely many "
                                   f"lower-dimensional pieces; add bonds with offsets along every primitive vector")
        if connectivity.translation_index > 1:
            self.fail("[[bonds]]", f"the lattice is disconnected: the bonds reach only 1 in "
                                   f"{connectivity.translation_index} cells, so the lattice falls apart into "
                                   f"{connectivity.translation_index} copies (e.g. a chain with only offset-2 bonds); "
                                   f"add bonds that join the copies")

    def check_expectations(self, expect, spec: LatticeSpec):
        expect = self.table(expect, "[expect]", "coordination = { J1 = 4 }")
        self.check_keys(expect, _EXPECT_KEYS, "[expect]", "[expect]")
        per_site = spec.site_coordination()
        coordination = self.table(expect.get("coordination", {}), "[expect] coordination", "{ J1 = 4 }")
        for label, wanted in coordination.items():
            context = f"[expect] coordination {label}"
            if label not in spec.labels:
                self.fail(context, f"no bond has this label; labels are {', '.join(spec.labels)}")
            if isinstance(wanted, dict):
                per_class = dict(wanted)
                for site_class in per_class:
                    if site_class not in spec.site_classes:
                        self.fail(f"{context}.{site_class}", f"no site has this class; site classes are "
                                                             f"{', '.join(spec.site_classes)}")
            else:
                touched = {spec.sites[end].site_class for b in spec.bonds if b.label == label
                           for end in (b.source, b.target)}
                per_class = {site_class: wanted for site_class in touched}
            for site_class, n in per_class.items():
                if isinstance(n, bool) or not isinstance(n, int) or n < 0:
                    self.fail(context, f"expected a non-negative integer or a table {{ class = n }}, got "
                                       f"{_describe(n)}")
                for i in spec.sites_of_class(site_class):
                    actual = per_site[i].get(label, 0)
                    if actual != n:
                        self.fail("[expect]", f'coordination {label} = {n}, but the bonds give {actual} for site '
                                              f'"{spec.sites[i].name}" (class {site_class}); fix the bonds or the '
                                              f"expectation")
        lengths = self.table(expect.get("bond_length", {}), "[expect] bond_length", "{ J1 = 1.0 }")
        for label, wanted in lengths.items():
            context = f"[expect] bond_length {label}"
            if label not in spec.labels:
                self.fail(context, f"no bond has this label; labels are {', '.join(spec.labels)}")
            wanted = self.number(wanted, context)
            for bond in spec.bonds:
                actual = float(np.linalg.norm(spec.bond_vector(bond)))
                if bond.label == label and abs(actual - wanted) > DEFAULT_TOLERANCE * max(1.0, wanted):
                    self.fail("[expect]", f'bond_length {label} = {_format_number(wanted)}, but the bond '
                                          f'"{spec.sites[bond.source].name}" -> "{spec.sites[bond.target].name}" '
                                          f"(offset {list(bond.offset)}) has length {_format_number(actual)}; fix "
                                          f"the bonds, the positions or the expectation")
