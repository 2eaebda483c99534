"""Spin models on a lattice: spins per site class, couplings per bond label, anisotropy, occupations.

Convention (CONVENTIONS.md): H = sum_b [Jxy_b (S_i^x S_j^x + S_i^y S_j^y) + Jz_b S_i^z S_j^z]
+ sum_i D_i (S_i^z)^2 - h sum_i S_i^z, each bond counted once, J > 0 antiferromagnetic, k_B = 1.
Values are exact (``fractions.Fraction``) in numeric mode or sympy expressions in symbolic mode.  This
module does no numerics.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

from hte.errors import ParameterError

ALLOWED_SPINS = tuple(Fraction(k, 2) for k in range(1, 11))  # 1/2 .. 5


def parse_spin(text) -> Fraction:
    """Parse a spin such as "1/2", "1", "3/2", 0.5; raise ParameterError unless 2S is a positive integer <= 10."""
    try:
        value = Fraction(str(text).strip())
    except (ValueError, ZeroDivisionError):
        raise ParameterError(f"spin {text!r} is not a number; write it like 1/2, 1, 3/2") from None
    if value not in ALLOWED_SPINS:
        raise ParameterError(f"spin {text!r} is not supported; use one of 1/2, 1, 3/2, 2, 5/2 (up to 5)")
    return value


def parse_exact(text, what: str) -> Fraction:
    """Parse an exact rational from "0.2", "1/3", "-4", 2 (floats are read through their decimal text)."""
    try:
        return Fraction(str(text).strip())
    except (ValueError, ZeroDivisionError):
        raise ParameterError(f"{what} = {text!r} is not a number (write e.g. 0.2 or 1/3)") from None


@dataclass(frozen=True)
class Coupling:
    """The two parts of one bond label's exchange: Jxy (transverse) and Jz (longitudinal)."""

    xy: object
    z: object

    @property
    def is_zero(self) -> bool:
        return self.xy == 0 and self.z == 0


@dataclass(frozen=True)
class SpinModel:
    """A spin model for one lattice.

    Attributes
    ----------
    kind : str
        "heisenberg" (Jxy = Jz for every label) or "xxz".
    spin : dict
        Spin per site class (Fraction).
    couplings : dict
        Coupling per bond label.
    anisotropy : dict
        Single-ion D per site class (only for S >= 1; default 0).
    occupation : dict
        Occupation probability per site class (Fraction or sympy symbol/expression).
    symbolic : bool
        Keep every labelled bond and return coefficients as polynomials in the coupling symbols.
    """

    kind: str
    spin: dict
    couplings: dict
    anisotropy: dict = field(default_factory=dict)
    occupation: dict = field(default_factory=dict)
    symbolic: bool = False

    def describe(self) -> str:
        return "H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D (Sz)^2 - h sum_i Sz, J > 0 antiferromagnetic"


def build_model(lattice, *, kind="heisenberg", spin=None, couplings=None, anisotropy=None, occupation=None,
                symbolic=False) -> SpinModel:
    """Combine a lattice's defaults with user values and check names and values.

    Parameters
    ----------
    lattice : LatticeSpec
    kind : "heisenberg" | "xxz"
    spin : dict or str, optional
        One spin for every class ("1/2") or {class: spin}.
    couplings : dict, optional
        {label: value} (sets Jxy = Jz), or {"label.xy": v, "label.z": v} for XXZ.  In symbolic mode a value
        may be a symbol name; labels not given become symbols named after the label.
    anisotropy : dict, optional
        {class: D}.
    occupation : dict, optional
        {class: p} with 0 <= p <= 1 or a symbol name.
    """
    import sympy

    if kind not in ("heisenberg", "xxz"):
        raise ParameterError(f"--model {kind!r}: use heisenberg or xxz")
    classes = list(lattice.site_classes)
    labels = list(lattice.labels)

    spins = {c: parse_spin(lattice.spin.get(c, "1/2")) for c in classes}
    if isinstance(spin, (str, int, float, Fraction)):
        spins = {c: parse_spin(spin) for c in classes}
    elif spin:
        for c, s in spin.items():
            if c not in classes:
                raise ParameterError(f"--spin: unknown site class {c!r}; the lattice has {', '.join(classes)}")
            spins[c] = parse_spin(s)

    def value_of(text, what):
        if symbolic and isinstance(text, str) and text.strip() and (text.strip()[0].isalpha()):
            return sympy.Symbol(text.strip())
        return parse_exact(text, what)

    parts = {}
    for label in labels:
        if symbolic:
            if kind == "xxz":
                parts[label] = [sympy.Symbol(f"{label}_xy"), sympy.Symbol(f"{label}_z")]
            else:
                s = sympy.Symbol(label)
                parts[label] = [s, s]
        else:
            v = parse_exact(lattice.couplings.get(label, 0), f"default coupling {label}")
            parts[label] = [v, v]
    for name, text in (couplings or {}).items():
        label, _, part = name.partition(".")
        if label not in labels:
            raise ParameterError(f"--couplings: unknown coupling label {label!r}; the lattice has {', '.join(labels)}")
        value = value_of(text, f"coupling {name}")
        if part == "":
            parts[label] = [value, value]
        elif part in ("xy", "z"):
            if kind != "xxz":
                raise ParameterError(f"--couplings {name}: separate .xy/.z parts need --model xxz")
            parts[label][0 if part == "xy" else 1] = value
        else:
            raise ParameterError(f"--couplings {name}: the part after the dot must be xy or z")
    coupling_map = {label: Coupling(*parts[label]) for label in labels}

    aniso = {c: Fraction(0) for c in classes}
    for c, text in (anisotropy or {}).items():
        if c not in classes:
            raise ParameterError(f"--anisotropy: unknown site class {c!r}; the lattice has {', '.join(classes)}")
        aniso[c] = parse_exact(text, f"anisotropy D of class {c}")
        if aniso[c] != 0 and spins[c] < 1:
            raise ParameterError(f"--anisotropy {c}={text}: single-ion D needs spin >= 1 (S = {spins[c]})")

    occ = {c: parse_exact(lattice.occupation.get(c, 1), f"default occupation of {c}") for c in classes}
    for c, text in (occupation or {}).items():
        if c not in classes:
            raise ParameterError(f"--occupation: unknown site class {c!r}; the lattice has {', '.join(classes)}")
        if isinstance(text, str) and text.strip()[:1].isalpha():
            occ[c] = sympy.Symbol(text.strip())
            continue
        occ[c] = parse_exact(text, f"occupation of {c}")
        if not 0 <= occ[c] <= 1:
            raise ParameterError(f"--occupation {c}={text}: a probability must lie between 0 and 1")
    return SpinModel(kind, spins, coupling_map, aniso, occ, symbolic)
