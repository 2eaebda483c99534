r"""High-temperature series of a lattice model: normalisation, derived quantities, JSON and a readable table.

All series are power series in beta = 1/T (T in units of the couplings, k_B = 1).  Per normalisation
(CONVENTIONS.md): "site" divides the per-cell sums by the number of basis sites of the undiluted lattice,
"cell" keeps them per cell, "magnetic" divides by the mean number of occupied sites per cell sum_c p_c n_c.

Quantities (keys of :attr:`HTSeries.coefficients`), each a list c_0..c_order of the coefficient of beta^n:

- ``lnZ``: ln Z / N; c_0 = sum_c p_c n_c ln(2 S_c + 1) / N is not rational and is kept apart as ``lnz0``.
- ``chiT``: T chi / N with g mu_B = 1 (c_0 = S(S+1)/3 times the occupation), chi* = chiT / T.
- ``M4``: (<M^4> - 3 <M^2>^2) / N at h = 0; ln Z(beta, h)/N contains (beta h)^4/4! times it.
- ``E``: energy per site, -d lnZ/d beta (one order shorter);  ``C``: beta^2 d^2 lnZ / d beta^2;
  ``S``: entropy, lnZ + beta E (its c_0 is lnz0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction

import sympy

from hte.exact import QUANTITIES
from hte.expansion import LatticeSeries

PER_CHOICES = ("site", "cell", "magnetic")


@dataclass
class HTSeries:
    """A lattice model's high-temperature series, normalised.

    In numeric mode every coefficient is a Fraction; in symbolic mode a sympy expression in the coupling and
    occupation symbols.  ``lnz0`` is the beta^0 term of lnZ (float or sympy expression with floats).
    """

    lattice: str
    model: str
    spin: dict
    couplings: dict
    occupation: dict
    per: str
    order: int
    coefficients: dict
    lnz0: object
    symbolic: bool
    stats: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)

    @classmethod
    def from_table(cls, doc: dict, order: int, *, lattice, model, per: str) -> "HTSeries":
        """Rebuild a numeric series from a stored per-site table document, truncated to `order`."""
        from hte.errors import TableMismatchError

        if doc.get("per") != "site":
            raise TableMismatchError(f"table for {doc.get('lattice')} is stored per {doc.get('per')}, expected per site")
        scale = Fraction(1)
        if per == "cell":
            scale = Fraction(lattice.n_sites)
        elif per == "magnetic":
            occupied = sum(len(lattice.sites_of_class(c)) * Fraction(str(p)) for c, p in model.occupation.items())
            scale = Fraction(lattice.n_sites) / occupied
        coefficients = {}
        for name, texts in doc["series"].items():
            values = [Fraction(t) for t in texts[: order + (0 if name == "E" else 1)]]
            if name in ("lnZ", "S"):
                values[0] = Fraction(0)
            coefficients[name] = [v * scale for v in values]
        lnz0 = float(doc["series"]["lnZ"][0]) * float(scale)
        return cls(doc["lattice"], doc["model"], dict(model.spin), dict(doc["couplings"]), dict(model.occupation),
                   per, order, coefficients, lnz0, False, provenance=dict(doc.get("provenance", {})))

    # ------------------------------------------------------------------ output
    def to_json_dict(self) -> dict:
        """The JSON document of CONVENTIONS.md ("series" holds lnZ, chiT, M4, E, C, S)."""
        series = {}
        for name, coefs in self.coefficients.items():
            texts = [_text(c) for c in coefs]
            if name in ("lnZ", "S"):
                texts[0] = _text(self.lnz0)
            series[name] = texts
        doc = {
            "lattice": self.lattice,
            "model": self.model,
            "spin": {c: str(s) for c, s in self.spin.items()},
            "couplings": self.couplings,
            "occupation": {c: str(p) for c, p in self.occupation.items()},
            "per": self.per,
            "order": self.order,
            "variable": "beta",
            "series": series,
            "exact": True,
        }
        if self.provenance:
            doc["provenance"] = self.provenance
        return doc

    def table(self) -> str:
        """A readable table of the coefficients (numeric mode: exact fraction and float)."""
        lines = [f"# {self.lattice}, {self.model}, per {self.per}, coefficients of beta^n"]
        names = [n for n in ("lnZ", "chiT", "C") if n in self.coefficients]
        if self.symbolic:
            for name in names:
                lines.append(f"{name}:")
                for n, c in enumerate(self.coefficients[name]):
                    value = self.lnz0 if (name == "lnZ" and n == 0) else c
                    lines.append(f"  {n:3d}  {value}")
            return "\n".join(lines)
        lines.append(f"{'n':>3}  " + "  ".join(f"{name:>24}" for name in names))
        for n in range(self.order + 1):
            cells = []
            for name in names:
                coefs = self.coefficients[name]
                if n >= len(coefs):
                    cells.append(f"{'':>24}")
                    continue
                value = self.lnz0 if (name == "lnZ" and n == 0) else coefs[n]
                cells.append(f"{float(value):>24.16g}")
            lines.append(f"{n:>3}  " + "  ".join(cells))
        return "\n".join(lines)


def _text(value) -> str:
    if isinstance(value, Fraction):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    return str(sympy.sympify(value))


def write_json_atomic(doc: dict, path) -> None:
    """Write JSON to `path` atomically (temporary file in the same folder, then rename)."""
    import json

    from hte.atomic import write_text_atomically

    write_text_atomically(path, lambda stream: stream.write(json.dumps(doc, indent=1) + "\n"))


# ---------------------------------------------------------------------------------------------- assembly
def _poly_to_value(poly: dict, variables: tuple, symbolic: bool):
    if not symbolic:
        return poly.get(tuple([0] * len(variables)), Fraction(0)) if poly else Fraction(0)
    expr = sympy.Integer(0)
    for mono, c in poly.items():
        term = sympy.Rational(c.numerator, c.denominator)
        for s, k in zip(variables, mono):
            if k:
                term *= s**k
        expr += term
    return sympy.expand(expr)


def normalise(ls: LatticeSeries, *, lattice, model, per: str = "site") -> HTSeries:
    """Turn per-cell polynomial sums into the normalised series with derived quantities."""
    from hte.errors import ParameterError

    if per not in PER_CHOICES:
        raise ParameterError(f"--per {per!r}: use one of {', '.join(PER_CHOICES)}")
    symbolic = bool(ls.variables)
    raw = {q: [_poly_to_value(p, ls.variables, symbolic) for p in ls.terms[q]] for q in ("lnz", "m2", "m4")
           if q in ls.terms}
    # beta^0 of ln Z: sum_c n_c p_c ln(2S+1), per cell
    lnz0 = 0.0 if not symbolic else sympy.Integer(0)
    occupied = Fraction(0) if not symbolic else sympy.Integer(0)
    for name, (n_c, spin) in ls.site_counts.items():
        p = model.occupation[name]
        occ = p if not symbolic else (sympy.sympify(str(p)) if isinstance(p, Fraction) else p)
        lnz0 = lnz0 + n_c * occ * (math.log(2 * spin + 1) if not symbolic else sympy.Float(math.log(2 * spin + 1)))
        occupied = occupied + n_c * occ
    if per == "site":
        divisor = lattice.n_sites
    elif per == "cell":
        divisor = 1
    else:
        divisor = occupied
        if divisor == 0:
            raise ParameterError("--per magnetic: no occupied sites (all occupations are 0)")
    if not symbolic:
        lnz0 = float(lnz0) / float(divisor)
        coefs = {k: [Fraction(c) / Fraction(divisor) for c in v] for k, v in raw.items()}
    else:
        # polynomials over a number are expanded, over a polynomial (per magnetic site) put over it in lowest
        # terms (sympy.simplify, used before, took time that grew fast with the size of the polynomials)
        tidy = sympy.expand if sympy.sympify(divisor).is_number else sympy.cancel
        lnz0 = tidy(lnz0 / divisor)
        coefs = {k: [tidy(c / divisor) for c in v] for k, v in raw.items()}
    lnz = coefs.get("lnz")
    order = ls.order
    if lnz is None:
        raise ParameterError("the series must include ln Z (quantity 'lnz')")
    energy = [-(n + 1) * lnz[n + 1] for n in range(order)]
    heat = [n * (n - 1) * lnz[n] for n in range(order + 1)]
    entropy = [(1 - n) * lnz[n] for n in range(order + 1)]
    coefficients = {"lnZ": lnz, "E": energy, "C": heat, "S": entropy}
    if "m2" in coefs:
        coefficients["chiT"] = coefs["m2"]
    if "m4" in coefs:
        coefficients["M4"] = coefs["m4"]
    couplings = {}
    for label, c in model.couplings.items():
        if c.xy == c.z:
            couplings[label] = str(c.xy)
        else:
            couplings[f"{label}.xy"] = str(c.xy)
            couplings[f"{label}.z"] = str(c.z)
    return HTSeries(lattice.name, model.kind, dict(model.spin), couplings, dict(model.occupation), per, order,
                    coefficients, lnz0, symbolic, dict(ls.stats))


def compute_series(lattice, *, order: int, model: str = "heisenberg", spin=None, couplings=None, occupation=None,
                   anisotropy=None, per: str = "site", symbolic: bool = False, workers: int = 1, cache=None,
                   progress: bool = False, use_tables: bool = False, lnz_only: bool = False,
                   m4: bool = True) -> HTSeries:
    """The high-temperature series of a spin model on a lattice, in a few lines.

    Parameters
    ----------
    lattice : str or LatticeSpec
        A built-in name (``"kagome"``), a path to a lattice file, or a loaded LatticeSpec.
    order : int
        Highest power of beta.
    model, spin, couplings, occupation, anisotropy, symbolic
        See :func:`hte.models.build_model`.
    per : "site" | "cell" | "magnetic"
    workers : int
        Processes for enumeration and cluster series.
    cache : WeightCache or None
        Persistent store of cluster series (None: no cache).
    use_tables : bool
        Answer from a shipped table in tables/ when one covers the request.
    lnz_only : bool
        Compute ln Z (and E, C, S) only; graphs whose bridges make their ln Z weight vanish are skipped.
    m4 : bool
        False: no M4 (the h^4 term), so that graphs whose ln Z and T chi weights both vanish are skipped.

    Examples
    --------
    >>> s = compute_series("chain", order=4)
    >>> s.coefficients["chiT"][:2]
    [Fraction(1, 4), Fraction(-1, 8)]
    """
    from hte.expansion import expand_lattice
    from hte.lattice import LatticeSpec
    from hte.lattice_file import load_lattice
    from hte.models import build_model

    spec = lattice if isinstance(lattice, LatticeSpec) else load_lattice(lattice)
    spin_model = build_model(spec, kind=model, spin=spin, couplings=couplings, anisotropy=anisotropy,
                             occupation=occupation, symbolic=symbolic)
    if use_tables:
        from hte.tables import find_table

        found = find_table(spec, spin_model, order)
        if found is not None:
            return HTSeries.from_table(found[0], order, lattice=spec, model=spin_model, per=per)
    ls = expand_lattice(spec, spin_model, order, cache=cache, workers=workers, progress=progress,
                        quantities=quantities_for(lnz_only, m4))
    return normalise(ls, lattice=spec, model=spin_model, per=per)


def quantities_for(lnz_only: bool = False, m4: bool = True) -> tuple[str, ...]:
    """The additive quantities (names of :data:`hte.exact.QUANTITIES`) that ``lnz_only`` and ``m4`` ask for."""
    if lnz_only:
        return ("lnz",)
    return QUANTITIES if m4 else ("lnz", "m2")
