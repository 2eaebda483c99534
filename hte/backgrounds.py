r"""Background terms that real samples add to the magnetic signal of the lattice.

Laboratory units throughout: temperatures, gaps and level energies in K (energy / k_B), field B in T,
susceptibility in emu/mol, magnetisation in mu_B and heat capacity in J/(mol K), all per mole (or per
unit) of formula units.  ``fraction`` or ``amount`` says how many impurity spins or level systems there are
per formula unit (for a fraction p of the n_magnetic magnetic ions, fraction = p * n_magnetic).

References
----------
.. [1] E. S. R. Gopal, Specific Heats at Low Temperatures (Plenum, New York, 1966): Schottky and Debye
       heat capacities.
.. [2] C. Kittel, Introduction to Solid State Physics, 8th ed. (Wiley, 2005), ch. 5 (Debye) and ch. 11
       (Brillouin function).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.integrate import cumulative_trapezoid, quad
from scipy.interpolate import PchipInterpolator

from hte import units as lab_units
from hte.errors import ParameterError
from hte.measured import Measurement

R = lab_units.GAS_CONSTANT
DEBYE_INTEGRAL_LIMIT = 4.0 * math.pi**4 / 15.0      # int_0^inf x^4 e^x / (e^x - 1)^2 dx


def _check_spin(spin: float):
    if spin <= 0 or abs(2 * spin - round(2 * spin)) > 1e-9:
        raise ParameterError(f"spin = {spin}: S must be a positive multiple of 1/2.")


def _positive_temperatures(temperature) -> np.ndarray:
    temps = np.asarray(temperature, dtype=float)
    if np.any(~(temps > 0)):
        raise ParameterError(f"temperatures must be > 0 K; got {temps[~(temps > 0)][0]:g} K.")
    return temps


# ---------------------------------------------------------------------------------------------------
# Paramagnetic impurities
# ---------------------------------------------------------------------------------------------------

def impurity_susceptibility(temperature, fraction: float, g: float = 2.0, spin: float = 0.5,
                            theta: float = 0.0):
    """Curie–Weiss susceptibility of impurity spins, f C_Curie(g, S) / (T - theta), in emu/mol.

    Parameters
    ----------
    temperature : array_like
        T in K.
    fraction : float
        Impurity spins per formula unit.
    g, spin : float
        Landé factor and spin of the impurities.
    theta : float
        Weiss temperature of the impurities in K (theta < 0 antiferromagnetic); 0 for free spins.
    """
    _check_spin(spin)
    return fraction * lab_units.curie_constant(g, spin) / (_positive_temperatures(temperature) - theta)


def brillouin(spin: float, x):
    r"""Brillouin function B_S(x) = a coth(a x) - b coth(b x), a = (2S+1)/(2S), b = 1/(2S).

    Written as a L(a x) - b L(b x) with the Langevin function L(y) = coth y - 1/y, which is evaluated by its
    series near y = 0, so B_S is accurate at small x, where B_S(x) ~ x (S+1)/(3S).  B_{1/2}(x) = tanh x.
    """
    _check_spin(spin)
    x = np.asarray(x, dtype=float)
    a = (2 * spin + 1) / (2 * spin)
    b = 1 / (2 * spin)
    return a * _langevin(a * x) - b * _langevin(b * x)


def _langevin(y):
    y = np.asarray(y, dtype=float)
    small = np.abs(y) < 1e-2
    safe = np.where(small, 1.0, y)
    series = y / 3 - y**3 / 45 + 2 * y**5 / 945
    return np.where(small, series, 1.0 / np.tanh(safe) - 1.0 / safe)


def impurity_magnetization(field, temperature, fraction: float, g: float = 2.0, spin: float = 0.5):
    """Magnetisation of free impurity spins, M = f g S B_S(g mu_B S B / (k_B T)), in mu_B per formula unit.

    Parameters
    ----------
    field : array_like
        B in T.
    temperature : array_like
        T in K (broadcast against `field`).
    fraction, g, spin : float
        Impurity spins per formula unit, their Landé factor and spin.
    """
    temps = _positive_temperatures(temperature)
    x = g * lab_units.BOHR_MAGNETON_OVER_BOLTZMANN * spin * np.asarray(field, dtype=float) / temps
    return fraction * g * spin * brillouin(spin, x)


# ---------------------------------------------------------------------------------------------------
# Schottky anomalies
# ---------------------------------------------------------------------------------------------------

def multilevel_heat_capacity(temperature, energies, degeneracies=None, amount: float = 1.0):
    r"""Heat capacity of independent systems with discrete levels, C = amount R (<E^2> - <E>^2) / T^2.

    Parameters
    ----------
    temperature : array_like
        T in K.
    energies : array_like
        Level energies E_i / k_B in K (any zero).
    degeneracies : array_like, optional
        Degeneracy of each level (default 1).
    amount : float
        Systems per formula unit.

    Returns
    -------
    numpy.ndarray
        C in J/(mol K) per mole of formula units.
    """
    temps = _positive_temperatures(temperature)
    levels = np.asarray(energies, dtype=float)
    weights = np.ones_like(levels) if degeneracies is None else np.asarray(degeneracies, dtype=float)
    if weights.shape != levels.shape or np.any(weights <= 0):
        raise ParameterError("degeneracies must be positive, one per energy level.")
    shifted = (levels - levels.min())[:, None] / np.atleast_1d(temps)[None, :]   # E/T, ground level 0
    boltzmann = weights[:, None] * np.exp(-shifted)
    probability = boltzmann / boltzmann.sum(axis=0)
    mean = (probability * shifted).sum(axis=0)
    variance = (probability * shifted**2).sum(axis=0) - mean**2
    result = amount * R * np.maximum(variance, 0.0)
    return result.reshape(np.shape(temps))


def two_level_schottky(temperature, gap: float, degeneracy_ratio: float = 1.0, amount: float = 1.0):
    """Schottky heat capacity of a two-level system with gap `gap` (K), upper/lower degeneracy ratio.

    For equal degeneracies the maximum is 0.4392 R at T = 0.4168 gap ([1]_).  Returns J/(mol K).
    """
    return multilevel_heat_capacity(temperature, [0.0, gap], [1.0, degeneracy_ratio], amount)


def zeeman_schottky(temperature, field: float, g: float = 2.0, spin: float = 0.5, amount: float = 1.0):
    """Schottky heat capacity of a free spin S split by B: levels g mu_B B m, m = -S..S, in J/(mol K).

    For S = 1/2 this is the two-level form with gap g mu_B B / k_B.
    """
    _check_spin(spin)
    m = np.arange(-spin, spin + 0.5, 1.0)
    levels = g * lab_units.BOHR_MAGNETON_OVER_BOLTZMANN * abs(field) * m
    return multilevel_heat_capacity(temperature, levels, amount=amount)


# ---------------------------------------------------------------------------------------------------
# Lattice (phonon) heat capacity
# ---------------------------------------------------------------------------------------------------

def debye_heat_capacity(temperature, debye_temperature: float, atoms: float = 1.0):
    r"""Debye lattice heat capacity C = 9 n R (T/theta_D)^3 int_0^{theta_D/T} x^4 e^x / (e^x - 1)^2 dx.

    The integral is done by adaptive quadrature (scipy.integrate.quad, relative tolerance 1e-12); beyond
    theta_D/T = 100 it equals 4 pi^4/15 to double precision.  Limits: 3 n R at high T, (12 pi^4/5) n R
    (T/theta_D)^3 at low T ([1]_, [2]_).

    Parameters
    ----------
    temperature : array_like
        T in K.
    debye_temperature : float
        theta_D in K.
    atoms : float
        Atoms per formula unit n.

    Returns
    -------
    numpy.ndarray
        C in J/(mol K) per mole of formula units.
    """
    if not debye_temperature > 0:
        raise ParameterError(f"debye_temperature = {debye_temperature}: theta_D must be > 0 K.")
    temps = _positive_temperatures(temperature)
    limits = debye_temperature / np.atleast_1d(temps)
    integrals = np.array([_debye_integral(limit) for limit in limits])
    result = 9.0 * atoms * R * integrals / limits**3
    return result.reshape(np.shape(temps))


def _debye_integral(limit: float) -> float:
    if limit > 100.0:
        return DEBYE_INTEGRAL_LIMIT

    def integrand(x):
        if x == 0.0:
            return 0.0
        return x**4 * math.exp(-x) / (-math.expm1(-x)) ** 2

    return quad(integrand, 0.0, limit, epsabs=0.0, epsrel=1e-12, limit=200)[0]


def low_temperature_lattice(temperature, beta: float, delta: float = 0.0):
    """Low-temperature lattice heat capacity beta T^3 + delta T^5 (beta in J/(mol K^4), delta in J/(mol K^6))."""
    temps = _positive_temperatures(temperature)
    return beta * temps**3 + delta * temps**5


def debye_temperature_from_beta(beta: float, atoms: float = 1.0) -> float:
    """theta_D = (12 pi^4 n R / (5 beta))^(1/3) in K, from the T^3 coefficient beta in J/(mol K^4)."""
    if not beta > 0:
        raise ParameterError(f"beta = {beta}: the T^3 coefficient must be > 0 J/(mol K^4).")
    return (12.0 * math.pi**4 * atoms * R / (5.0 * beta)) ** (1.0 / 3.0)


def subtract_phonon_reference(measurement: Measurement, reference_temperature, reference_heat_capacity,
                              scale: float = 1.0, temperature_scale: float = 1.0) -> Measurement:
    """Subtract a measured lattice reference (e.g. a non-magnetic analogue) from C(T).

    C_mag(T) = C(T) - scale * C_ref(temperature_scale * T), C_ref interpolated by a monotone cubic (PCHIP)
    through the reference points.  `temperature_scale` = theta_D(reference) / theta_D(sample) applies the
    usual corresponding-states rescaling of the reference (1 for none; common practice).  No extrapolation:
    every point must fall inside the reference range.  The reference's own uncertainty is not propagated.

    Parameters
    ----------
    measurement : Measurement
        Heat capacity (quantity ``"C"``), J/(mol K).
    reference_temperature, reference_heat_capacity : array_like
        The reference curve in K and J/(mol K) per mole of formula units.
    """
    if measurement.quantity != "C":
        raise ParameterError(f"{measurement.source}: phonon subtraction applies to heat capacity, not "
                             f"{measurement.quantity!r}.")
    ref_t = np.asarray(reference_temperature, dtype=float)
    ref_c = np.asarray(reference_heat_capacity, dtype=float)
    order = np.argsort(ref_t)
    ref_t, ref_c = ref_t[order], ref_c[order]
    if ref_t.size < 2 or ref_t.shape != ref_c.shape or np.any(np.diff(ref_t) <= 0):
        raise ParameterError("the phonon reference needs at least 2 points with distinct temperatures and one "
                             "heat capacity per temperature.")
    where = temperature_scale * measurement.temperature
    outside = np.flatnonzero((where < ref_t[0]) | (where > ref_t[-1]))
    if outside.size:
        raise ParameterError(f"{measurement.where(outside[0])}: outside the phonon reference range "
                             f"{ref_t[0] / temperature_scale:g}-{ref_t[-1] / temperature_scale:g} K "
                             f"({outside.size} points); restrict the data or extend the reference.")
    phonon = scale * PchipInterpolator(ref_t, ref_c)(where)
    return replace(measurement, value=measurement.value - phonon)


# ---------------------------------------------------------------------------------------------------
# Magnetic entropy
# ---------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class MagneticEntropy:
    """Entropy S(T) = S(T_0) + int_{T_0}^T C_mag/T' dT' in J/(mol K), with the expected full value.

    Attributes
    ----------
    temperature, entropy : numpy.ndarray
        T in K and S(T) in J/(mol K) per mole of formula units.
    below_first_point : float
        S(T_0), the part below the lowest measured temperature from the chosen extrapolation.
    expected : float or None
        n R ln(2S+1) for n_magnetic spins S per formula unit, when the spin was given.
    """

    temperature: np.ndarray
    entropy: np.ndarray
    below_first_point: float
    expected: float | None

    def fraction_recovered(self) -> float:
        """S at the highest temperature divided by n R ln(2S+1)."""
        if self.expected is None:
            raise ParameterError("give spin= to magnetic_entropy to compare with R ln(2S+1).")
        return float(self.entropy[-1] / self.expected)


def magnetic_entropy(temperature, heat_capacity, low_t_power: float | None = None, spin: float | None = None,
                     n_magnetic: float = 1) -> MagneticEntropy:
    """Integrate C_mag/T over T (trapezoid rule on the measured points).

    Parameters
    ----------
    temperature, heat_capacity : array_like
        T in K (sorted ascending, distinct) and C_mag in J/(mol K).
    low_t_power : float, optional
        Extrapolation below the lowest point T_0: C = C(T_0) (T/T_0)^alpha, adding S(T_0) = C(T_0)/alpha
        (alpha = 3 for 3D antiferromagnetic magnons or phonons, 2 for 2D, 1 for a linear term).  None:
        S(T_0) = 0, i.e. the entropy is counted from T_0 only.
    spin : float, optional
        Spin S, to compare with the full entropy n R ln(2S+1).
    n_magnetic : float
        Magnetic ions per formula unit.
    """
    temps = _positive_temperatures(temperature)
    capacity = np.asarray(heat_capacity, dtype=float)
    if temps.ndim != 1 or temps.shape != capacity.shape or temps.size < 2 or np.any(np.diff(temps) <= 0):
        raise ParameterError("magnetic_entropy needs >= 2 points, temperatures strictly increasing, one heat "
                             "capacity per temperature.")
    below = 0.0
    if low_t_power is not None:
        if not low_t_power > 0:
            raise ParameterError(f"low_t_power = {low_t_power}: the exponent alpha of C ~ T^alpha must be > 0.")
        below = float(capacity[0] / low_t_power)
    entropy = below + cumulative_trapezoid(capacity / temps, temps, initial=0.0)
    expected = None
    if spin is not None:
        _check_spin(spin)
        expected = n_magnetic * R * math.log(2 * spin + 1)
    return MagneticEntropy(temperature=temps, entropy=entropy, below_first_point=below, expected=expected)
