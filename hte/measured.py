r"""Measured data: read chi(T), C(T) and M(H) or M(T) files with explicit units.

A data file is CSV, TSV (or semicolon-separated) or whitespace-separated text.  Lines starting with ``#``
and blank lines are skipped; the first other line is the header (column names), unless every field of it
is a number, in which case the file has no header and columns must be given by 1-based position.

Values are stored in canonical units (see :mod:`hte.units`): temperature in K, susceptibility in emu/mol
per mole of formula units, heat capacity in J/(mol K) per mole of formula units, magnetisation in muB per
formula unit, field B = mu_0 H in T.  Every point keeps its line number so that messages can point at it.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from hte import units as lab_units
from hte.diamagnetism import diamagnetic_susceptibility
from hte.errors import DataFileError, ParameterError

QUANTITIES = ("chi", "C", "M")
DEFAULT_UNITS = {"T": "K", "chi": "emu/mol", "C": "J/(mol K)"}   # M and B have no default: say which


@dataclass(frozen=True)
class Measurement:
    """One measured curve in canonical units, sorted by temperature (then field).

    Attributes
    ----------
    quantity : str
        ``"chi"`` (emu/mol), ``"C"`` (J/(mol K)) or ``"M"`` (muB per formula unit); per formula unit.
    temperature : numpy.ndarray
        Temperature of each point in K.
    value : numpy.ndarray
        The measured quantity in its canonical unit (:attr:`unit`).
    sigma : numpy.ndarray or None
        One-standard-deviation uncertainty of `value`, same unit; None if the file gives none.
    field : numpy.ndarray or None
        Applied field B = mu_0 H of each point in T; None if not known.
    source : str
        The file the data came from.
    lines : numpy.ndarray
        1-based line number of each point in `source`.
    n_magnetic : float
        Magnetic ions per formula unit.
    molar_mass : float or None
        Grams per mole of formula units, if given.
    diamagnetic_correction : float
        chi_dia in emu/mol already subtracted from `value` (0 if none).
    """

    quantity: str
    temperature: np.ndarray
    value: np.ndarray
    sigma: np.ndarray | None = None
    field: np.ndarray | None = None
    source: str = "<memory>"
    lines: np.ndarray | None = None
    n_magnetic: float = 1
    molar_mass: float | None = None
    diamagnetic_correction: float = 0.0

    def __post_init__(self):
        if self.lines is None:
            object.__setattr__(self, "lines", np.arange(1, len(self.temperature) + 1))

    @property
    def unit(self) -> str:
        """Canonical unit of :attr:`value`."""
        return lab_units.canonical_unit(self.quantity)

    def __len__(self) -> int:
        return len(self.temperature)

    def subset(self, selection) -> "Measurement":
        """Return the points picked by a boolean mask or an index array, with their line numbers."""
        pick = np.asarray(selection)
        return replace(self, temperature=self.temperature[pick], value=self.value[pick],
                       sigma=None if self.sigma is None else self.sigma[pick],
                       field=None if self.field is None else self.field[pick], lines=self.lines[pick])

    def where(self, index: int) -> str:
        """Describe point `index` for messages: file, line, temperature (and field)."""
        text = f"{self.source}, line {self.lines[index]}: T = {self.temperature[index]:g} K"
        if self.field is not None:
            text += f", B = {self.field[index]:g} T"
        return text


def read_measurement(path, quantity: str = "chi", columns: dict | None = None, units: dict | None = None, *,
                     molar_mass: float | None = None, n_magnetic: float = 1,
                     field=None, temperature=None, uncertainty_column=None, diamagnetic=None,
                     min_points: int = 3) -> Measurement:
    """Read a measured curve from a text file.

    Parameters
    ----------
    path : str or Path
        CSV, TSV or whitespace-separated text file; ``#`` starts a comment line.
    quantity : {"chi", "C", "M"}
        Susceptibility, heat capacity or magnetisation.
    columns : dict, optional
        Column of each variable by header name or 1-based position, keys ``"T"``, the quantity and ``"B"``
        (field, for M).  Defaults: the column named like the key (``T``, ``chi``, ``C``, ``M``, ``B``); a
        name matches case-insensitively when that is unambiguous.
    units : dict, optional
        Unit of each column, same keys.  Defaults: T in K, chi in emu/mol, C in J/(mol K); M and B must be
        given (e.g. ``{"M": "emu/mol", "B": "Oe"}``).  Per-mass units (emu/g, J/(g K)) need `molar_mass`.
    molar_mass : float, optional
        Grams per mole of formula units.
    n_magnetic : float
        Magnetic ions per formula unit (kept with the data for later conversions).
    field : float or str, optional
        The applied field of the whole curve: a number in T or a string like ``"1000 Oe"``.  For M, give
        either this or a field column.
    temperature : float or str, optional
        For M(H) at one temperature: a number in K or a string like ``"2 K"``; otherwise a T column is read.
    uncertainty_column : str or int, optional
        Column with one-standard-deviation uncertainties of the quantity, in the quantity's unit.
    diamagnetic : float or dict, optional
        Core diamagnetism to subtract from chi: a value in emu/mol (negative) or a composition
        ``{ion: count}`` for :func:`hte.diamagnetism.diamagnetic_susceptibility`.
    min_points : int
        Fewest data rows accepted.

    Returns
    -------
    Measurement
        Sorted by temperature, then field.

    Raises
    ------
    DataFileError
        Unreadable or empty file, missing column, non-numeric or non-finite cell, T <= 0, duplicated
        point, unit that does not fit the quantity, too few points.
    ParameterError
        Unknown quantity or column key, impossible option value.
    """
    path = Path(path)
    if quantity not in QUANTITIES:
        raise ParameterError(f"quantity {quantity!r} is unknown; use one of {', '.join(QUANTITIES)}.")
    if n_magnetic <= 0:
        raise ParameterError(f"n_magnetic = {n_magnetic}; it must be positive (magnetic ions per formula unit).")
    keys = _needed_keys(quantity, field, temperature)
    column_spec = _merge_options("columns", columns, {key: key for key in keys}, keys)
    unit_spec = _merge_options("units", units, {k: DEFAULT_UNITS[k] for k in keys if k in DEFAULT_UNITS}, keys)
    for key in keys:
        if key not in unit_spec:
            raise DataFileError(f"{path}: no unit given for column {key!r} ({lab_units.QUANTITY_NAMES[key]}); "
                                f"pass units={{{key!r}: ...}}, e.g. one of {', '.join(lab_units.known_units(key))}.")
    if uncertainty_column is not None:
        column_spec["sigma"] = uncertainty_column

    header, rows = _read_table(path)
    positions = {key: _column_index(path, header, rows[0][0], key, spec) for key, spec in column_spec.items()}
    table = _numeric_columns(path, header, rows, positions)
    lines = np.array([line for line, _ in rows])
    if len(lines) < min_points:
        raise DataFileError(f"{path}: only {len(lines)} data rows; at least {min_points} are needed.")

    converted = {key: _convert_column(path, table[key], key, unit_spec[key], molar_mass) for key in keys}
    sigma = None
    if "sigma" in table:
        sigma = _convert_column(path, table["sigma"], quantity, unit_spec[quantity], molar_mass)
    n = len(lines)
    temps = converted["T"] if "T" in converted else np.full(n, _scalar(path, temperature, "T"))
    fields = converted.get("B")
    if fields is None and field is not None:
        fields = np.full(n, _scalar(path, field, "B"))

    _check_temperatures(path, temps, lines, "T" in converted)
    if sigma is not None:
        _check_uncertainties(path, sigma, lines)
    order = np.lexsort((fields if fields is not None else np.zeros(n), temps))
    measurement = Measurement(
        quantity=quantity, temperature=temps[order], value=converted[quantity][order],
        sigma=None if sigma is None else sigma[order], field=None if fields is None else fields[order],
        source=str(path), lines=lines[order], n_magnetic=n_magnetic, molar_mass=molar_mass)
    _check_duplicates(measurement)
    if diamagnetic is not None:
        measurement = subtract_diamagnetism(measurement, diamagnetic)
    return measurement


def subtract_diamagnetism(measurement: Measurement, diamagnetic) -> Measurement:
    """Return chi - chi_dia: `diamagnetic` is chi_dia in emu/mol or a composition ``{ion: count}``.

    The correction is recorded in :attr:`Measurement.diamagnetic_correction`.
    """
    if measurement.quantity != "chi":
        raise ParameterError(f"{measurement.source}: a diamagnetic correction applies to chi, "
                             f"not to {measurement.quantity}.")
    chi_dia = diamagnetic_susceptibility(diamagnetic) if isinstance(diamagnetic, dict) else float(diamagnetic)
    return replace(measurement, value=measurement.value - chi_dia,
                   diamagnetic_correction=measurement.diamagnetic_correction + chi_dia)


def susceptibility_from_magnetization(measurement: Measurement) -> Measurement:
    """Turn M(T) measured in a field into chi = M/H in emu/mol (the low-field, linear-response estimate).

    Needs the field of every point (a field column or ``field=`` when reading); B = 0 is refused.
    """
    if measurement.quantity != "M":
        raise ParameterError(f"{measurement.source}: expected magnetisation data (quantity 'M'), got "
                             f"{measurement.quantity!r}.")
    if measurement.field is None:
        raise ParameterError(f"{measurement.source}: the field is unknown; read the file with field=... "
                             f"(e.g. field='1000 Oe') or a field column to form M/H.")
    zero = np.flatnonzero(measurement.field == 0)
    if zero.size:
        raise DataFileError(f"{measurement.where(zero[0])}: M/H needs a nonzero field.")
    chi = lab_units.susceptibility_from_magnetization(measurement.value, measurement.field)
    sigma = None
    if measurement.sigma is not None:
        sigma = np.abs(lab_units.susceptibility_from_magnetization(measurement.sigma, measurement.field))
    return replace(measurement, quantity="chi", value=chi, sigma=sigma)


# ---------------------------------------------------------------------------------------------------
# Outliers
# ---------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Outlier:
    """A point whose residual from a smooth local fit is anomalous; reported, never dropped."""

    index: int
    line: int
    temperature: float
    value: float
    residual: float
    score: float

    def describe(self, measurement: Measurement) -> str:
        """One line for a report: where the point is and how far it lies off the curve."""
        return (f"{measurement.where(self.index)}: {measurement.quantity} = {self.value:.6g} "
                f"{measurement.unit} lies {self.score:.1f} times the local scatter off the smooth curve")


def local_scatter(measurement: Measurement) -> np.ndarray:
    """Noise of each point estimated from the data themselves, in the unit of the data.

    The robust local scatter of the residuals from a smooth local fit (see :func:`find_outliers`), turned
    back into the unit of the values.  Useful where a file gives no uncertainties.
    """
    return _local_fit(measurement).noise


def find_outliers(measurement: Measurement, threshold: float = 5.0) -> list[Outlier]:
    """Flag points lying more than `threshold` local scatters off a smooth local fit.

    Each point is predicted by a cubic fitted to its 6 nearest neighbours, itself left out, in the
    variables ln|value| against ln T (or against B for an M(H) curve at one temperature); plain values when
    the data change sign.  Residuals are divided by their expected spread (the point's uncertainty, or 1,
    combined with the variance of the prediction).  The local scatter of point i is 1.4826 times the median
    absolute standardised residual of the 25 points around it, a robust standard deviation that the outliers
    themselves barely move.  Flagged points are left out of their neighbours' fits and the flags are
    recomputed until they no longer change, so that one spike does not drag its neighbours along.  The
    points are only reported; the caller decides whether to drop any (e.g. with ``measurement.subset(mask)``).

    The method assumes points dense enough that the curve is smooth over 7 consecutive points; on sparse
    data (a few points per decade of T) the local fits miss the curvature and points are flagged because the
    curve bends, not because they are wrong.
    """
    flagged = np.zeros(len(measurement), dtype=bool)
    fit = _local_fit(measurement)
    for _ in range(10):
        updated = np.abs(fit.standardised) > threshold * fit.scale
        if np.array_equal(updated, flagged):
            break
        flagged = updated
        if np.count_nonzero(~flagged) < _NEIGHBOURS + 2:
            break
        fit = _local_fit(measurement, excluded=flagged)
    return [Outlier(index=int(i), line=int(measurement.lines[i]), temperature=float(measurement.temperature[i]),
                    value=float(measurement.value[i]), residual=float(measurement.value[i] - fit.prediction[i]),
                    score=float(abs(fit.standardised[i]) / fit.scale[i]))
            for i in np.flatnonzero(flagged)]


@dataclass(frozen=True)
class _LocalFit:
    prediction: np.ndarray      # leave-one-out prediction of each value, unit of the data
    standardised: np.ndarray    # residual / its expected spread
    scale: np.ndarray           # robust local scatter of `standardised`
    noise: np.ndarray           # that scatter in the unit of the data


_NEIGHBOURS = 6      # points in each local fit


def _local_fit(measurement: Measurement, excluded=None, neighbours: int = _NEIGHBOURS, span: int = 12,
               degree: int = 3) -> _LocalFit:
    n = len(measurement)
    usable = np.flatnonzero(~excluded) if excluded is not None else np.arange(n)
    if usable.size < neighbours + 2:
        raise DataFileError(f"{measurement.source}: {usable.size} points are too few to judge the scatter; at least "
                            f"{neighbours + 2} are needed.")
    x = _independent_variable(measurement)
    values = measurement.value
    logarithmic = bool(np.all(values > 0) or np.all(values < 0))
    y = np.log(np.abs(values)) if logarithmic else values
    if measurement.sigma is None:
        spread = np.ones(n)
    else:
        spread = measurement.sigma / np.abs(values) if logarithmic else measurement.sigma
    prediction = np.empty(n)
    standardised = np.empty(n)
    for i in range(n):
        others = usable[usable != i]
        place = np.searchsorted(others, i)
        start = min(max(place - neighbours // 2, 0), others.size - neighbours)
        nearest = others[start:start + neighbours]
        width = np.ptp(x[nearest]) or 1.0
        design = np.vander((x[nearest] - x[i]) / width, degree + 1, increasing=True) / spread[nearest, None]
        coefficients, *_ = np.linalg.lstsq(design, y[nearest] / spread[nearest], rcond=None)
        prediction_variance = np.linalg.pinv(design.T @ design)[0, 0]
        prediction[i] = coefficients[0]
        standardised[i] = (y[i] - coefficients[0]) / np.sqrt(spread[i] ** 2 + prediction_variance)
    scale = np.array([1.4826 * np.median(np.abs(standardised[max(i - span, 0): i + span + 1]))
                      for i in range(n)])
    scale = np.maximum(scale, np.finfo(float).tiny)
    if logarithmic:
        prediction = np.sign(values) * np.exp(prediction)
    noise = scale * spread * (np.abs(values) if logarithmic else 1.0)
    return _LocalFit(prediction=prediction, standardised=standardised, scale=scale, noise=noise)


# ---------------------------------------------------------------------------------------------------
# Reading helpers
# ---------------------------------------------------------------------------------------------------

def _needed_keys(quantity, field, temperature) -> list[str]:
    if temperature is not None and quantity != "M":
        raise ParameterError(f"temperature= is for M(H) curves; {quantity} is read against a T column.")
    if quantity == "M" and field is not None and temperature is not None:
        raise ParameterError("quantity 'M' with both field= and temperature= fixed leaves nothing varying; "
                             "read the field or the temperature from a column.")
    keys = [] if temperature is not None else ["T"]
    if quantity == "M" and field is None:
        keys.append("B")
    return keys + [quantity]


def _merge_options(name, given, defaults, keys) -> dict:
    merged = dict(defaults)
    for key, value in (given or {}).items():
        if key not in keys:
            raise ParameterError(f"{name}: key {key!r} is not used here; the keys are {', '.join(keys)}.")
        merged[key] = value
    return merged


def _scalar(path, value, quantity) -> float:
    if isinstance(value, str):
        try:
            return lab_units.parse_quantity(value, quantity)
        except ParameterError as error:
            raise DataFileError(f"{path}: {error}") from None
    return float(value)


def _read_table(path: Path):
    try:
        raw = path.read_bytes()
    except OSError as error:
        raise DataFileError(f"{path}: cannot read the file ({error.strerror}).") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    content = [(number, line) for number, line in enumerate(text.splitlines(), start=1)
               if line.strip() and not line.lstrip().startswith("#")]
    if not content:
        raise DataFileError(f"{path}: the file is empty (no lines other than comments and blanks).")
    first = content[0][1]
    delimiter = next((d for d in (",", "\t", ";") if d in first), None)
    split = ((lambda line: next(csv.reader([line], delimiter=delimiter))) if delimiter
             else (lambda line: line.split()))
    fields = [(number, [cell.strip() for cell in split(line)]) for number, line in content]
    if all(_is_number(cell) for cell in fields[0][1]):
        header = None
        rows = fields
    else:
        header = fields[0][1]
        rows = fields[1:]
    if not rows:
        raise DataFileError(f"{path}: the header (line {fields[0][0]}) is followed by no data rows.")
    return header, rows


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def _column_index(path, header, first_line, key, spec) -> int:
    if isinstance(spec, bool) or not isinstance(spec, (int, str)):
        raise ParameterError(f"columns[{key!r}] = {spec!r}: give a header name or a 1-based position.")
    if isinstance(spec, int):
        if spec < 1 or (header is not None and spec > len(header)):
            count = f"the header has {len(header)} columns" if header is not None else "positions start at 1"
            raise DataFileError(f"{path}: column position {spec} for {key!r} does not exist; {count}.")
        return spec - 1
    if header is None:
        raise DataFileError(f"{path}: the file has no header line (line {first_line} is data), so column "
                            f"{spec!r} cannot be found by name; give columns by 1-based position, e.g. "
                            f"columns={{'T': 1, {key!r}: 2}}.")
    if spec in header:
        return header.index(spec)
    folded = [i for i, name in enumerate(header) if name.lower() == spec.lower()]
    if len(folded) == 1:
        return folded[0]
    role = "" if spec == key else f" (for {key!r})"
    raise DataFileError(f"{path}: column {spec!r}{role} not found; the header has "
                        f"{', '.join(repr(name) for name in header)}. Pass columns={{{key!r}: NAME or position}}.")


def _numeric_columns(path, header, rows, positions) -> dict:
    table = {key: np.empty(len(rows)) for key in positions}
    for row_number, (line, cells) in enumerate(rows):
        for key, index in positions.items():
            name = repr(header[index]) if header is not None else f"{index + 1}"
            if index >= len(cells):
                raise DataFileError(f"{path}, line {line}: has {len(cells)} fields, but column {name} "
                                    f"(for {key!r}) is field {index + 1}; fix the row or comment it out with '#'.")
            cell = cells[index]
            try:
                number = float(cell)
            except ValueError:
                what = "is empty" if not cell else f"holds {cell!r}, which is not a number"
                raise DataFileError(f"{path}, line {line}, column {name}: the cell {what}; fix it or comment "
                                    f"the line out with '#'.") from None
            if not np.isfinite(number):
                raise DataFileError(f"{path}, line {line}, column {name}: {cell!r} is not a finite number; "
                                    f"remove the line or comment it out with '#'.")
            table[key][row_number] = number
    return table


def _convert_column(path, values, key, unit, molar_mass):
    try:
        return lab_units.to_canonical(values, key, unit, molar_mass)
    except ParameterError as error:
        raise DataFileError(f"{path}: units[{key!r}] = {unit!r}: {error}") from None


def _check_temperatures(path, temps, lines, from_column: bool):
    bad = np.flatnonzero(temps <= 0)
    if bad.size:
        where = f"{path}, line {lines[bad[0]]}" if from_column else f"{path}: temperature="
        raise DataFileError(f"{where}: temperature {temps[bad[0]]:g} K is not positive "
                            f"({bad.size} such point(s)); temperatures must be > 0 K.")


def _check_uncertainties(path, sigma, lines):
    bad = np.flatnonzero(~(sigma > 0))
    if bad.size:
        raise DataFileError(f"{path}, line {lines[bad[0]]}: uncertainty {sigma[bad[0]]:g} is not positive; every "
                            f"uncertainty must be > 0 (drop the uncertainty column to fit unweighted).")


def _check_duplicates(measurement: Measurement):
    t, b = measurement.temperature, measurement.field
    same = (t[1:] == t[:-1]) & (True if b is None else (b[1:] == b[:-1]))
    hit = np.flatnonzero(same)
    if hit.size:
        i = hit[0]
        what = f"temperature T = {t[i]:g} K" + ("" if b is None else f" at field B = {b[i]:g} T")
        raise DataFileError(f"{measurement.source}, lines {measurement.lines[i]} and {measurement.lines[i + 1]}: "
                            f"duplicated {what}; average the repeated points or remove one.")


def _independent_variable(measurement: Measurement):
    if measurement.field is not None and np.ptp(measurement.temperature) == 0:
        return measurement.field
    return np.log(measurement.temperature)
