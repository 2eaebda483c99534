r"""Core diamagnetism from Pascal's constants.

The diamagnetic susceptibility of a formula unit is estimated as the sum of tabulated contributions of its
ions and ligands, chi_dia = sum_k n_k chi_k (negative, emu/mol).  The measured susceptibility is corrected as
chi_spin = chi_measured - chi_dia.

Source of the table: G. A. Bain and J. F. Berry, "Diamagnetic corrections and Pascal's constants",
J. Chem. Educ. 85, 532 (2008), Tables 1 (cations), 2 (anions) and 6 (common ligands).  The values below were
written from memory and have not been checked against the paper here; check them before quoting a result
that depends on them, or pass your own value with ``extra``.
"""

from __future__ import annotations

from hte.errors import ParameterError

PASCAL_CONSTANTS = {   # 1e-6 emu/mol per ion or molecule; from memory (see module docstring)
    # cations
    "Li+": -1.0, "Na+": -6.8, "K+": -14.9, "Rb+": -22.5, "Cs+": -35.0, "NH4+": -13.3,
    "Mg2+": -5.0, "Ca2+": -10.4, "Sr2+": -19.0, "Ba2+": -26.5, "Zn2+": -15.0,
    "Cu2+": -11.0, "Ni2+": -12.0, "Co2+": -12.0, "Fe2+": -13.0, "Fe3+": -10.0, "Mn2+": -14.0,
    "Cr3+": -11.0, "V4+": -7.0,
    # anions
    "F-": -9.1, "Cl-": -23.4, "Br-": -34.6, "I-": -50.6, "OH-": -12.0, "O2-": -12.0,
    "NO3-": -18.9, "ClO4-": -32.0, "SO4^2-": -40.1, "CO3^2-": -29.5,
    # neutral ligands
    "H2O": -13.0, "NH3": -18.0,
}


def _normalise(name: str) -> str:
    return str(name).replace("^", "").replace(" ", "")


_BY_NORMALISED = {_normalise(name): name for name in PASCAL_CONSTANTS}


def diamagnetic_susceptibility(composition: dict | None = None, extra: float = 0.0) -> float:
    """Return the core diamagnetic susceptibility of one formula unit, in emu/mol (negative).

    Parameters
    ----------
    composition : dict, optional
        ``{ion_or_ligand: count}``, e.g. ``{"Cu2+": 3, "Zn2+": 1, "OH-": 6, "Cl-": 2}``; names as in
        :data:`PASCAL_CONSTANTS` (``"SO4^2-"`` may be written ``"SO42-"``).
    extra : float
        A further contribution in emu/mol (e.g. an organic ligand computed elsewhere), added as given.

    Raises
    ------
    ParameterError
        For a name that is not in the table or a negative count.
    """
    total = float(extra)
    for name, count in (composition or {}).items():
        key = _BY_NORMALISED.get(_normalise(name))
        if key is None:
            raise ParameterError(f"diamagnetic correction: {name!r} is not in the Pascal-constant table; known "
                                 f"names are {', '.join(PASCAL_CONSTANTS)}. Add its value (emu/mol) to `extra`.")
        if count < 0:
            raise ParameterError(f"diamagnetic correction: count of {name!r} is {count}; it must be >= 0.")
        total += count * PASCAL_CONSTANTS[key] * 1e-6
    return total
