r"""Laboratory units: the only module of hte that holds physical constants.

Every constant comes from :mod:`scipy.constants`, i.e. the CODATA recommended values shipped with scipy
(CODATA 2022 for scipy >= 1.15; :data:`CODATA_EDITION` reports the edition actually in use).  Since the 2019
SI redefinition k_B, N_A, e, h and c are exact, so the K / meV / cm^-1 / J conversions are exact; mu_B
carries a relative uncertainty of about 3e-10.

Canonical laboratory units (what :mod:`hte.measured` stores):

=================  ======================================  ==============================
quantity           canonical unit                          per
=================  ======================================  ==============================
susceptibility     emu/mol  (= emu/(mol Oe) = cm^3/mol)    mole of formula units
heat capacity      J/(mol K)                               mole of formula units
magnetisation      muB/f.u. (Bohr magnetons)               formula unit
field              T (B = mu_0 H in free space)
temperature        K
=================  ======================================  ==============================

A formula unit holds ``n_magnetic`` magnetic ions.  Data given per mole of magnetic ions are data per
formula unit of one ion: use ``n_magnetic=1`` and the molar mass of that unit.

cgs-Gaussian to SI: chi_mol(SI, m^3/mol) = 4 pi 1e-6 chi_mol(cgs, emu/mol); 1 emu = 1e-3 A m^2;
1 Oe corresponds to 1e-4 T in free space.  These factors are definitions of the cgs units (the SI value of
mu_0 differs from 4 pi 1e-7 N/A^2 by about 1e-10 relative, far below any measurement).

Unit strings are parsed, so ``"J/(mol K)"``, ``"J mol^-1 K^-1"``, ``"J/mol/K"`` and ``"J/mol K"`` are the same
unit: as in laboratory headers, every factor after a slash is in the denominator.
"""

from __future__ import annotations

import math
import re

import numpy as np
import scipy.constants as _sc

from hte.errors import ParameterError

CODATA_EDITION: str = getattr(getattr(_sc, "_codata", None), "_current_codata", "CODATA (edition not reported)")

BOLTZMANN = _sc.k                                              # J/K
AVOGADRO = _sc.N_A                                             # 1/mol
GAS_CONSTANT = _sc.R                                           # J/(mol K)
BOHR_MAGNETON = _sc.physical_constants["Bohr magneton"][0]     # J/T
ELEMENTARY_CHARGE = _sc.e                                      # C
PLANCK = _sc.h                                                 # J s
SPEED_OF_LIGHT = _sc.c                                         # m/s
VACUUM_PERMEABILITY = _sc.mu_0                                 # N/A^2

BOHR_MAGNETON_CGS = BOHR_MAGNETON * 1e3     # erg/G = emu   (1 J/T = 1e7 erg / 1e4 G)
BOLTZMANN_CGS = BOLTZMANN * 1e7             # erg/K
BOHR_MAGNETON_OVER_BOLTZMANN = BOHR_MAGNETON / BOLTZMANN   # K/T: Zeeman energy of 1 muB in 1 T, in kelvin

CGS_TO_SI_MOLAR_SUSCEPTIBILITY = 4.0 * math.pi * 1e-6   # chi_SI [m^3/mol] per chi_cgs [emu/mol]; a definition

ENERGY_UNITS = {                       # joule per unit
    "K": BOLTZMANN,
    "meV": 1e-3 * ELEMENTARY_CHARGE,
    "cm-1": 100.0 * PLANCK * SPEED_OF_LIGHT,
    "J": 1.0,
}
_ENERGY_ALIASES = {"k": "K", "kelvin": "K", "mev": "meV", "cm-1": "cm-1", "cm^-1": "cm-1", "1/cm": "cm-1",
                   "cm⁻¹": "cm-1", "j": "J", "joule": "J"}

CONVENTIONS = {
    # name: (factor f with J_ours = f * J_theirs, description)
    "J": (1.0, "H = J sum S_i.S_j, J > 0 antiferromagnetic"),
    "-J": (-1.0, "H = -J sum S_i.S_j, J > 0 ferromagnetic"),
    "2J": (2.0, "H = 2J sum S_i.S_j, J > 0 antiferromagnetic"),
    "-2J": (-2.0, "H = -2J sum S_i.S_j, J > 0 ferromagnetic"),
    "sigma": (4.0, "H = J sum sigma_i.sigma_j with sigma = 2S, J > 0 antiferromagnetic"),
}


# ---------------------------------------------------------------------------------------------------
# Energies and exchange conventions
# ---------------------------------------------------------------------------------------------------

def _energy_unit(name: str) -> str:
    key = _ENERGY_ALIASES.get(str(name).strip().lower().replace(" ", ""))
    if key is None:
        raise ParameterError(f"energy unit {name!r} is unknown; use one of {', '.join(ENERGY_UNITS)}.")
    return key


def convert_energy(value, from_unit: str, to_unit: str):
    """Convert an energy (or a temperature k_B T) between K, meV, cm^-1 and J.

    Parameters
    ----------
    value : float or array_like
        Energy in `from_unit`.
    from_unit, to_unit : str
        One of ``"K"`` (k_B * 1 K), ``"meV"``, ``"cm-1"`` (h c * 1 cm^-1; also ``"cm^-1"``, ``"1/cm"``), ``"J"``.

    Returns
    -------
    float or numpy.ndarray
        The energy in `to_unit`.
    """
    factor = ENERGY_UNITS[_energy_unit(from_unit)] / ENERGY_UNITS[_energy_unit(to_unit)]
    return np.asarray(value, dtype=float) * factor if np.ndim(value) else float(value) * factor


def convert_coupling(value, from_convention: str, to_convention: str = "J"):
    """Convert an exchange constant between Hamiltonian conventions; never guessed.

    Conventions (bond sums count each bond once):

    ``"J"``      H = J sum S_i.S_j        (ours; J > 0 antiferromagnetic)
    ``"-J"``     H = -J sum S_i.S_j       (J > 0 ferromagnetic)
    ``"2J"``     H = 2J sum S_i.S_j       (J_ours = 2 J)
    ``"-2J"``    H = -2J sum S_i.S_j      (J_ours = -2 J; J > 0 ferromagnetic)
    ``"sigma"``  H = J sum sigma_i.sigma_j with sigma = 2S  (J_ours = 4 J)

    Parameters
    ----------
    value : float or array_like
        Exchange constant written in `from_convention` (any energy unit; it is kept).
    from_convention, to_convention : str
        Names above.

    Returns
    -------
    float or numpy.ndarray
        The same physical coupling written in `to_convention`.
    """
    factors = []
    for name in (from_convention, to_convention):
        if name not in CONVENTIONS:
            raise ParameterError(f"exchange convention {name!r} is unknown; use one of "
                                 f"{', '.join(repr(c) for c in CONVENTIONS)} (ours is 'J').")
        factors.append(CONVENTIONS[name][0])
    factor = factors[0] / factors[1]
    return np.asarray(value, dtype=float) * factor if np.ndim(value) else float(value) * factor


def describe_convention(name: str) -> str:
    """Return the Hamiltonian of exchange convention `name` in words, for reports."""
    if name not in CONVENTIONS:
        raise ParameterError(f"exchange convention {name!r} is unknown; use one of {', '.join(CONVENTIONS)}.")
    return CONVENTIONS[name][1]


# ---------------------------------------------------------------------------------------------------
# Curie constant, reduced susceptibility, effective moment
# ---------------------------------------------------------------------------------------------------

def curie_constant(g: float, spin: float, n_magnetic: float = 1) -> float:
    r"""Curie constant of free spins, C = n N_A g^2 mu_B^2 S(S+1) / (3 k_B), in emu K/mol (cgs).

    About 0.12505 g^2 S(S+1) emu K/mol per mole of spins; S = 1/2, g = 2 gives 0.3751.

    Parameters
    ----------
    g : float
        Landé factor.
    spin : float
        Spin quantum number S (e.g. 0.5).
    n_magnetic : float
        Magnetic ions per formula unit; the result is per mole of formula units.
    """
    return n_magnetic * AVOGADRO * g**2 * BOHR_MAGNETON_CGS**2 * spin * (spin + 1) / (3.0 * BOLTZMANN_CGS)


def reduced_susceptibility_factor(coupling_kelvin: float, g: float, n_magnetic: float = 1) -> float:
    r"""Factor turning the reduced chi* = chi J / (N g^2 mu_B^2) per magnetic ion into emu/mol.

    chi_mol [emu/mol per formula unit] = factor * chi*, factor = n N_A g^2 mu_B^2 / (k_B J) (cgs), where chi*
    is the series quantity per magnetic ion with g mu_B = k_B = 1 and temperatures in units of J.

    Parameters
    ----------
    coupling_kelvin : float
        The reference coupling J / k_B in K (our convention, H = J sum S_i.S_j); must be nonzero.
    g : float
        Landé factor.
    n_magnetic : float
        Magnetic ions per formula unit.
    """
    if coupling_kelvin == 0:
        raise ParameterError("coupling_kelvin = 0: the reduced susceptibility needs a nonzero energy unit J.")
    return n_magnetic * AVOGADRO * g**2 * BOHR_MAGNETON_CGS**2 / (BOLTZMANN_CGS * coupling_kelvin)


def effective_moment(curie: float, n_magnetic: float = 1) -> float:
    r"""Effective moment mu_eff = sqrt(3 k_B C / (n N_A mu_B^2)) ~ sqrt(8 C / n), in mu_B per magnetic ion.

    Parameters
    ----------
    curie : float
        Curie constant in emu K/mol per mole of formula units.
    n_magnetic : float
        Magnetic ions per formula unit.
    """
    if curie < 0:
        raise ParameterError(f"Curie constant {curie} emu K/mol is negative; mu_eff needs C >= 0.")
    return math.sqrt(3.0 * BOLTZMANN_CGS * curie / (n_magnetic * AVOGADRO * BOHR_MAGNETON_CGS**2))


# ---------------------------------------------------------------------------------------------------
# Unit strings
# ---------------------------------------------------------------------------------------------------

_SUPERSCRIPTS = str.maketrans("⁻⁰¹²³⁴⁵⁶⁷⁸⁹−", "-0123456789-")
_TOKEN = re.compile(r"([A-Za-zμµ_]+|1(?=$|[\s*/)]))\^?\{?([-+]?\d+)?\}?")
_TOKEN_ALIASES = {"µb": "mub", "μb": "mub", "mu_b": "mub", "μ_b": "mub", "µ_b": "mub", "fu": "f.u."}


def parse_unit(text: str) -> tuple[tuple[str, int], ...]:
    """Parse a unit string into sorted (lower-case symbol, exponent) pairs.

    Factors are separated by spaces, ``*``, ``·``, ``.`` or ``/``; every factor after a slash (at the same level of
    parentheses) is in the denominator, so ``"J/mol K"`` means J/(mol K).  Exponents may be written
    ``m^3``, ``m3``, ``mol^-1``, ``mol-1`` or with Unicode superscripts.  A bare ``1`` is ignored.

    Raises
    ------
    ParameterError
        If the string has unbalanced parentheses or characters that are not part of a unit.
    """
    source = str(text)
    text = source.translate(_SUPERSCRIPTS).replace("·", " ").replace("*", " ").strip()
    text = re.sub(r"f\.u\.?", "fu", text).replace(".", " ")   # a dot multiplies, except inside f.u.
    if not text:
        raise ParameterError("empty unit string; give a unit such as 'emu/mol'.")
    powers: dict[str, int] = {}
    sign_stack = [1]          # sign of the enclosing group
    divided = [False]         # whether a slash has been seen at this level
    position = 0
    while position < len(text):
        char = text[position]
        if char.isspace():
            position += 1
        elif char == "/":
            divided[-1] = True
            position += 1
        elif char == "(":
            sign_stack.append(sign_stack[-1] * (-1 if divided[-1] else 1))
            divided.append(False)
            position += 1
        elif char == ")":
            if len(sign_stack) == 1:
                raise ParameterError(f"unit {source!r}: unbalanced ')'.")
            sign_stack.pop()
            divided.pop()
            position += 1
        else:
            match = _TOKEN.match(text, position)
            if match is None:
                raise ParameterError(f"unit {source!r}: cannot read {text[position:]!r}; "
                                     f"write factors like 'emu', 'mol^-1' separated by spaces or '/'.")
            symbol = match.group(1).lower()
            exponent = int(match.group(2)) if match.group(2) else 1
            position = match.end()
            if symbol == "1":
                continue
            symbol = _TOKEN_ALIASES.get(symbol, symbol)
            sign = sign_stack[-1] * (-1 if divided[-1] else 1)
            powers[symbol] = powers.get(symbol, 0) + sign * exponent
    if len(sign_stack) != 1:
        raise ParameterError(f"unit {source!r}: unbalanced '('.")
    return tuple(sorted((s, p) for s, p in powers.items() if p != 0))


def _mass_factor(molar_mass, unit: str, quantity: str) -> float:
    if molar_mass is None:
        raise ParameterError(f"{quantity} unit {unit!r} is per mass: give molar_mass (g per mole of formula "
                             f"units) to convert it to a molar quantity.")
    if not molar_mass > 0:
        raise ParameterError(f"molar_mass = {molar_mass} g/mol; it must be positive.")
    return float(molar_mass)


# Each entry: canonical spelling -> (factor to the canonical unit, mass power).  The value in the canonical
# unit is value * factor * molar_mass**mass_power (molar_mass in g/mol).
_MU_B_MOLAR_CGS = AVOGADRO * BOHR_MAGNETON_CGS      # emu/mol per muB/f.u.
_MU_B_MOLAR_SI = AVOGADRO * BOHR_MAGNETON           # A m^2/mol per muB/f.u.
_UNIT_TABLES = {
    "chi": ("emu/mol", {
        "emu/mol": (1.0, 0), "emu/(mol Oe)": (1.0, 0), "cm^3/mol": (1.0, 0),
        "m^3/mol": (1.0 / CGS_TO_SI_MOLAR_SUSCEPTIBILITY, 0),
        "emu/g": (1.0, 1), "emu/(g Oe)": (1.0, 1), "cm^3/g": (1.0, 1),
        "m^3/kg": (1e-3 / CGS_TO_SI_MOLAR_SUSCEPTIBILITY, 1),
    }),
    "M": ("muB/f.u.", {
        "muB/f.u.": (1.0, 0), "muB": (1.0, 0),
        "emu/mol": (1.0 / _MU_B_MOLAR_CGS, 0), "A m^2/mol": (1.0 / _MU_B_MOLAR_SI, 0),
        "emu/g": (1.0 / _MU_B_MOLAR_CGS, 1), "A m^2/kg": (1e-3 / _MU_B_MOLAR_SI, 1),
    }),
    "C": ("J/(mol K)", {
        "J/(mol K)": (1.0, 0), "mJ/(mol K)": (1e-3, 0),
        "J/(g K)": (1.0, 1), "mJ/(g K)": (1e-3, 1), "J/(kg K)": (1e-3, 1),
    }),
    "B": ("T", {"T": (1.0, 0), "mT": (1e-3, 0), "Oe": (1e-4, 0), "kOe": (1e-1, 0), "G": (1e-4, 0),
                "A/m": (VACUUM_PERMEABILITY, 0)}),
    "T": ("K", {"K": (1.0, 0), "mK": (1e-3, 0)}),
}
QUANTITY_NAMES = {"chi": "susceptibility", "M": "magnetisation", "C": "heat capacity", "B": "magnetic field",
                  "T": "temperature"}


def canonical_unit(quantity: str) -> str:
    """Return the canonical unit of `quantity` (``"chi"``, ``"M"``, ``"C"``, ``"B"`` or ``"T"``)."""
    return _table(quantity)[0]


def known_units(quantity: str) -> list[str]:
    """Return the unit spellings accepted for `quantity` (other spellings of the same unit also work)."""
    return list(_table(quantity)[1])


def _table(quantity: str):
    if quantity not in _UNIT_TABLES:
        raise ParameterError(f"quantity {quantity!r} is unknown; use one of {', '.join(_UNIT_TABLES)}.")
    return _UNIT_TABLES[quantity]


def _lookup(quantity: str, unit: str):
    parsed = parse_unit(unit)
    for spelling, entry in _table(quantity)[1].items():
        if parse_unit(spelling) == parsed:
            return spelling, entry
    raise ParameterError(f"unit {unit!r} is not a {QUANTITY_NAMES[quantity]} unit; use one of "
                         f"{', '.join(known_units(quantity))}.")


def to_canonical(value, quantity: str, unit: str, molar_mass: float | None = None):
    """Convert `value` of `quantity` from `unit` to the canonical unit (see module docstring).

    Parameters
    ----------
    value : float or array_like
    quantity : str
        ``"chi"`` (-> emu/mol), ``"M"`` (-> muB/f.u.), ``"C"`` (-> J/(mol K)), ``"B"`` (-> T), ``"T"`` (-> K).
    unit : str
        Unit of `value`, e.g. ``"emu/(mol Oe)"``, ``"m3/mol"``, ``"emu/g"``, ``"mJ/(mol K)"``, ``"Oe"``.
    molar_mass : float, optional
        Grams per mole of formula units; required for per-mass units (emu/g, J/(g K), ...).

    Raises
    ------
    ParameterError
        If `unit` does not measure `quantity`, or a per-mass unit is given without `molar_mass`.
    """
    spelling, (factor, mass_power) = _lookup(quantity, unit)
    if mass_power:
        factor *= _mass_factor(molar_mass, spelling, QUANTITY_NAMES[quantity]) ** mass_power
    return np.asarray(value, dtype=float) * factor if np.ndim(value) else float(value) * factor


def from_canonical(value, quantity: str, unit: str, molar_mass: float | None = None):
    """Inverse of :func:`to_canonical`: convert `value` from the canonical unit of `quantity` to `unit`."""
    factor = to_canonical(1.0, quantity, unit, molar_mass)
    return np.asarray(value, dtype=float) / factor if np.ndim(value) else float(value) / factor


def convert(value, quantity: str, from_unit: str, to_unit: str, molar_mass: float | None = None):
    """Convert `value` of `quantity` from `from_unit` to `to_unit` (e.g. chi from emu/mol to m^3/mol)."""
    return from_canonical(to_canonical(value, quantity, from_unit, molar_mass), quantity, to_unit, molar_mass)


def parse_quantity(text: str, quantity: str) -> float:
    """Read a value with its unit, e.g. ``"1000 Oe"`` or ``"0.1 T"``, and return it in the canonical unit."""
    parts = str(text).strip().split(None, 1)
    try:
        number = float(parts[0])
    except (ValueError, IndexError):
        raise ParameterError(f"{QUANTITY_NAMES[quantity]} {text!r}: expected a number followed by a unit, "
                             f"e.g. '1000 Oe'.") from None
    if len(parts) == 1:
        raise ParameterError(f"{QUANTITY_NAMES[quantity]} {text!r} has no unit; write e.g. "
                             f"'{number:g} {canonical_unit(quantity)}'.")
    return to_canonical(number, quantity, parts[1])


def susceptibility_from_magnetization(magnetization_mub, field_tesla):
    """Return chi = M/H in emu/mol from M in muB per formula unit and B = mu_0 H in tesla.

    Valid where M is linear in the field (M << saturation).  M [emu/mol] = M [muB/f.u.] N_A mu_B(cgs), and
    H [Oe] = 1e4 B [T].
    """
    return np.asarray(magnetization_mub, dtype=float) * _MU_B_MOLAR_CGS / (np.asarray(field_tesla) * 1e4)
