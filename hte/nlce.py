r"""Numerical linked-cluster expansion (NLCE): thermodynamics on a temperature grid from full cluster spectra.

The graph classes are those of the high-temperature series (:func:`hte.clusters.enumerate_clusters`: connected
bond clusters, counted per unit cell), but the property of a cluster G is not a power series: it is the exact
value, at every temperature of the grid, of an extensive quantity computed from the full spectrum of H0(G)
(:func:`hte.exact.cluster_spectrum`).  With P(G) one of

* ``lnZ``: ln Tr e^{-beta H0} (including the free-spin entropy sum_i ln(2 S_i + 1));
* ``E``: <H0>;  ``C``: beta^2 (<H0^2> - <H0>^2);  ``M2``: <M^2> at h = 0 (M = sum_i S^z_i, g mu_B = 1);
* ``S``: lnZ + beta E,

the linked weight is found by subgraph subtraction at each temperature separately,

    W(G) = P(G) - sum_{g connected, proper, >= 1 bond} c(g, G) W(g) - sum_{v in G} W(v),

and the partial sum of order n (per unit cell) is the single-site terms sum_c n_c p_c W(site_c) plus
sum_{G with <= n bonds} L(G) prod_c p_c^{n_c(G)} W(G): the same structure as :class:`hte.weight_book.WeightBook`
and :func:`hte.expansion.expand_lattice`, with arrays over the grid instead of series.  A cluster of n bonds
contributes first at beta^n, so the order-n partial sum reproduces the high-temperature series through beta^n
and in addition contains every higher term of the clusters it includes.

Normalisation as in :mod:`hte.series`: per site of the undiluted lattice, per cell, or per occupied magnetic
site.  chi* = <M^2> / (N T) (chi J / (N g^2 mu_B^2)), C and S per site with k_B = 1, E in units of the
reference coupling.

The sequence of partial sums S_1..S_n over the bond order is resummed by Wynn's epsilon algorithm and by
Euler's transformation (:mod:`hte.accelerate`).  The estimate is the Wynn value; the band spans the last two
bare orders and both resummations; T_conv is the lowest grid temperature above which the relative band
half-width stays below the tolerance.  Where the bare orders agree to 1e-12 (high T) the bare value is used
for every candidate, since the transformations only amplify rounding there.

References
----------
.. [1] M. Rigol, T. Bryant and R. R. P. Singh, Phys. Rev. Lett. 97, 187202 (2006); Phys. Rev. E 75, 061118
   (2007) (numerical linked-cluster expansions and their resummation).
.. [2] B. Tang, E. Khatami and M. Rigol, Comput. Phys. Commun. 184, 557 (2013) (bond-based NLCE, Wynn and
   Euler resummations).
"""

from __future__ import annotations

import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import sympy

from hte.accelerate import euler_transform, wynn_epsilon
from hte.canonical import key_to_graph
from hte.clusters import ClusterCensus, enumerate_clusters, subgraph_counts
from hte.errors import ParameterError, ResourceLimitError
from hte.pade import Band, convergence_temperature
from hte.series import PER_CHOICES
from hte.valued_graph import ValuedGraph, hamiltonian_of, make_valued, site_graph

PROPERTIES = ("lnZ", "E", "C", "M2", "S")  # rows of a cluster's property array
CURVES = ("chi", "C", "S", "E")
DEFAULT_MEMORY_LIMIT = 4 * 2**30  # bytes for the dense sector matrices of one diagonalisation
_CONVERGED = 1e-12  # relative change between the last two bare orders below which they count as converged
_BOLTZMANN_ENTRIES = 2**22  # temperatures x states handled in one block


# ---------------------------------------------------------------------------------------------- one cluster
def thermodynamics_from_spectrum(spectrum: dict, temperatures: np.ndarray) -> np.ndarray:
    """Extensive properties of one cluster at each temperature, from its full spectrum.

    Parameters
    ----------
    spectrum : dict
        Magnetization m -> eigenvalues of H0 in the sector S^z_total = m (units of the couplings), every sector
        (as returned by :func:`hte.exact.cluster_spectrum`).
    temperatures : ndarray
        T > 0 in the same unit, k_B = 1.

    Returns
    -------
    ndarray, shape (5, len(temperatures))
        Rows in the order of ``PROPERTIES``: ln Z, <H0>, beta^2 Var(H0), <M^2>, ln Z + beta <H0>.  The spectrum
        is shifted by its lowest level before exponentiation, so no temperature overflows.
    """
    energies = np.concatenate([np.asarray(levels, dtype=float) for levels in spectrum.values()])
    magnetization = np.concatenate([np.full(len(levels), float(m)) for m, levels in spectrum.items()])
    ground = energies.min()
    excitation = energies - ground
    m_squared = magnetization**2
    beta = 1.0 / np.asarray(temperatures, dtype=float)
    out = np.empty((len(PROPERTIES), beta.size))
    block = max(1, _BOLTZMANN_ENTRIES // energies.size)
    for start in range(0, beta.size, block):
        b = beta[start: start + block]
        weights = np.exp(-b[:, None] * excitation[None, :])
        z = weights.sum(axis=1)
        mean_excitation = weights @ excitation / z
        spread = excitation[None, :] - mean_excitation[:, None]
        variance = np.einsum("ts,ts->t", weights, spread**2) / z
        ln_z = np.log(z)
        out[0, start: start + block] = ln_z - b * ground
        out[1, start: start + block] = ground + mean_excitation
        out[2, start: start + block] = b**2 * variance
        out[3, start: start + block] = weights @ m_squared / z
        out[4, start: start + block] = ln_z + b * mean_excitation
    return out


def cluster_thermodynamics(vg: ValuedGraph, temperatures: np.ndarray) -> np.ndarray:
    """:func:`thermodynamics_from_spectrum` of the valued graph's Hamiltonian (dense diagonalisation per sector)."""
    from hte.exact import cluster_spectrum

    return thermodynamics_from_spectrum(cluster_spectrum(hamiltonian_of(vg)), temperatures)


def _properties_job(args):
    key, vg, temperatures = args
    return key, cluster_thermodynamics(vg, temperatures)


# ---------------------------------------------------------------------------------------------- memory guard
def largest_sector_dimension(twice_spins) -> int:
    """Dimension of the largest S^z_total sector of sites with spins twice_spins[i] / 2."""
    counts = np.array([1], dtype=object)
    for t in twice_spins:
        counts = np.convolve(counts, np.ones(int(t) + 1, dtype=object))
    return int(max(counts))


def diagonalisation_bytes(n_sites: int, twice_spin: int) -> int:
    """Memory of one dense sector diagonalisation of n_sites spins twice_spin/2: the matrix and LAPACK's copy."""
    d = largest_sector_dimension([twice_spin] * n_sites)
    return 2 * 8 * d * d


def check_cluster_size(max_bonds: int, twice_spin: int, memory_limit: int, workers: int = 1) -> None:
    """Raise ResourceLimitError unless clusters of `max_bonds` bonds (up to max_bonds + 1 sites) fit in memory.

    A connected cluster of n bonds has at most n + 1 sites (a tree); `workers` diagonalisations run at once.
    """
    need = workers * diagonalisation_bytes(max_bonds + 1, twice_spin)
    if need <= memory_limit:
        return
    fits = 0
    while fits + 1 < max_bonds and workers * diagonalisation_bytes(fits + 2, twice_spin) <= memory_limit:
        fits += 1
    spin = Fraction(twice_spin, 2)
    hint = f"use max_bonds <= {fits}" if fits >= 2 else "no max_bonds >= 2 fits; raise the memory limit"
    raise ResourceLimitError(
        f"max_bonds {max_bonds}: the largest cluster has up to {max_bonds + 1} spins {spin}, whose largest S^z sector "
        f"has {largest_sector_dimension([twice_spin] * (max_bonds + 1))} states; diagonalising it densely "
        f"({workers} at a time) needs about {need / 2**30:.2f} GiB, above the limit of "
        f"{memory_limit / 2**30:.2f} GiB; {hint} (or pass a larger memory_limit)")


# ---------------------------------------------------------------------------------------------- weights
class LinkedWeights:
    """Cluster properties and linked weights of valued graphs, as arrays over one temperature grid.

    ``weight(key)`` returns W(G), shape (5, n_T) with rows ``PROPERTIES``; the cluster's own property P(G) is
    computed on demand (or in bulk by :meth:`ensure`, optionally in worker processes).
    """

    def __init__(self, temperatures, workers: int = 1):
        self.temperatures = np.asarray(temperatures, dtype=float)
        self.workers = workers
        self.valued: dict[str, ValuedGraph] = {}
        self.own: dict[str, np.ndarray] = {}
        self.linked: dict[str, np.ndarray] = {}
        self.relabelled: dict[tuple, str] = {}  # (local subgraph key, palettes) -> valued key; site value -> key

    def add(self, vg: ValuedGraph) -> str:
        self.valued.setdefault(vg.key, vg)
        return vg.key

    def ensure(self, graphs) -> None:
        """Diagonalise every graph of `graphs` whose property is not known yet."""
        todo = {vg.key: vg for vg in graphs if vg.key not in self.own}
        for vg in todo.values():
            self.add(vg)
        jobs = [(k, vg, self.temperatures) for k, vg in todo.items()]
        if self.workers > 1 and len(jobs) > 1:
            with ProcessPoolExecutor(max_workers=self.workers) as pool:
                results = list(pool.map(_properties_job, jobs, chunksize=max(1, len(jobs) // (4 * self.workers))))
        else:
            results = [_properties_job(j) for j in jobs]
        self.own.update(results)

    def weight(self, key: str) -> np.ndarray:
        """Linked weight W of the valued graph `key` (added before with :meth:`add` or :meth:`ensure`)."""
        if key in self.linked:
            return self.linked[key]
        vg = self.valued[key]
        if key not in self.own:
            self.ensure([vg])
        w = self.own[key].copy()
        if vg.graph.n_edges >= 1:
            for colour in vg.graph.vertex_colours:
                w -= self.weight(self.site_key(vg.vertex_values[colour]))
            for sub_key, count in self.subgraphs(vg).items():
                w -= count * self.weight(sub_key)
        self.linked[key] = w
        return w

    def site_key(self, value) -> str:
        """Key of the one-site graph with vertex value (S, D)."""
        if value not in self.relabelled:
            self.relabelled[value] = self.add(site_graph(value))
        return self.relabelled[value]

    def subgraphs(self, vg: ValuedGraph) -> dict[str, int]:
        """Connected proper subgraphs (>= 1 bond) of `vg` as valued-graph keys -> embedding counts."""
        result: dict[str, int] = {}
        for local_key, count in subgraph_counts(vg.graph).items():
            memo = (local_key, vg.vertex_values, vg.edge_values)
            if memo not in self.relabelled:
                g = key_to_graph(local_key)
                self.relabelled[memo] = self.add(make_valued(
                    g.n_vertices, [vg.vertex_values[c] for c in g.vertex_colours],
                    [(u, v, vg.edge_values[c]) for u, v, c in g.edges]))
            sub_key = self.relabelled[memo]
            result[sub_key] = result.get(sub_key, 0) + count
        return result


# ---------------------------------------------------------------------------------------------- result
@dataclass
class NLCEResult:
    """NLCE curves of one lattice model on an ascending temperature grid (units of the reference coupling).

    Attributes
    ----------
    temperatures : ndarray
        The T grid.
    per : str
        Normalisation: "site", "cell" or "magnetic".
    orders : list of int
        Bond orders 1..max_bonds of the partial sums.
    partial_sums : dict
        Quantity ("lnZ", "chi", "C", "S", "E") -> array (len(orders), n_T) of normalised partial sums.
    estimates : dict
        Quantity ("chi", "C", "S", "E") -> {"bare": last order, "bare_previous": the one before, "wynn": Wynn
        epsilon over all orders, "euler": Euler transformation of the terms from ``euler_start`` on}; a
        resummation that needs more orders than there are is absent.
    curves : dict
        Quantity -> :class:`hte.pade.Band`: estimate = Wynn (bare last order without enough orders), band = the
        range of all candidates in ``estimates``.
    T_conv : dict
        Quantity -> lowest T above which the relative band half-width stays <= tolerance (None: nowhere).
    tolerance : float
    seconds_per_order : list of float
        Wall time of diagonalisation and subtraction for the clusters of each bond order.
    stats : dict
        "enumeration_s", "graph_classes" per order, "largest_cluster_sites".
    metadata : dict
        "lattice", "model", "spin", "couplings", "occupation", "per".
    """

    temperatures: np.ndarray
    per: str
    orders: list
    partial_sums: dict
    estimates: dict
    curves: dict
    T_conv: dict
    tolerance: float
    seconds_per_order: list
    stats: dict = field(default_factory=dict)
    metadata: dict = field(default_factory=dict)

    def to_curve_set(self, label: str | None = None):
        """The same curves as a :class:`hte.curves.CurveSet` (method "nlce") for JSON, CSV and plots."""
        from hte.curves import CurveSet

        candidates = {name: {"accepted": sorted(self.estimates[name]), "rejected": {}} for name in self.curves}
        warnings = [f"{name}: the band exceeds {self.tolerance:g} at every temperature of the grid"
                    for name, t in self.T_conv.items() if t is None]
        metadata = dict(self.metadata, max_bonds=self.orders[-1])
        return CurveSet(self.temperatures, "nlce", dict(self.curves), dict(self.T_conv), self.tolerance, None,
                        candidates, [], warnings, metadata, label)


# ---------------------------------------------------------------------------------------------- lattice sum
def _grid(temperatures) -> np.ndarray:
    grid = np.asarray(temperatures, dtype=float).ravel()
    if grid.size == 0:
        raise ParameterError("temperatures: the grid is empty; give at least one T > 0")
    bad = grid[~(np.isfinite(grid) & (grid > 0))]
    if bad.size:
        raise ParameterError(f"temperatures: T = {bad[0]} is not a positive finite number; every T must be > 0 "
                             "(units of the reference coupling)")
    return np.unique(grid)


def _numeric(value, what: str) -> Fraction:
    if isinstance(value, sympy.Basic) and not value.is_number:
        raise ParameterError(f"{what} = {value}: the NLCE needs numeric values; give a number instead of a symbol")
    return value if isinstance(value, Fraction) else Fraction(str(value))


def _resum(sequence: np.ndarray, euler_start: int) -> dict:
    """Bare and resummed candidates from partial sums, shape (n_orders, n_T)."""
    out = {"bare": sequence[-1], "bare_previous": sequence[-2]}
    if sequence.shape[0] >= 3:
        out["wynn"] = wynn_epsilon(sequence).estimate
    if sequence.shape[0] >= euler_start + 2:
        out["euler"] = euler_transform(sequence, start=euler_start).estimate
    converged = np.abs(sequence[-1] - sequence[-2]) <= _CONVERGED * np.maximum(np.abs(sequence[-1]), 1e-300)
    return {name: np.where(converged | ~np.isfinite(values), sequence[-1], values) for name, values in out.items()}


def nlce_curves(lattice, model, max_bonds: int, temperatures, *, per: str = "site", workers: int = 1,
                tolerance: float = 0.01, euler_start: int | None = None, memory_limit: int = DEFAULT_MEMORY_LIMIT,
                census: ClusterCensus | None = None) -> NLCEResult:
    """Thermodynamics of a lattice spin model by the bond-based numerical linked-cluster expansion.

    Parameters
    ----------
    lattice : LatticeSpec
        The lattice (:func:`hte.lattice_file.load_lattice`).
    model : SpinModel
        Numeric model for it (:func:`hte.models.build_model`); H = sum_b [Jxy (SxSx + SySy) + Jz SzSz]
        + sum_i D (Sz)^2, J > 0 antiferromagnetic.  Occupations p_c weight a cluster by prod_c p_c^{n_c}
        (quenched site dilution).
    max_bonds : int
        Largest cluster size in bonds (>= 2); the partial sums run over orders 1..max_bonds.
    temperatures : array_like
        T > 0 in units of the couplings (k_B = 1); sorted and de-duplicated.
    per : {"site", "cell", "magnetic"}
        Normalisation (see :mod:`hte.series`).
    workers : int
        Processes for enumeration and diagonalisation.
    tolerance : float
        Relative band half-width defining T_conv.
    euler_start : int, optional
        Index (0-based, into S_1..S_n) of the first term that Euler's transformation acts on; default n // 2,
        so the low orders, which are not yet alternating, are summed directly.
    memory_limit : int
        Bytes allowed for the dense diagonalisations running at once (default 4 GiB).
    census : ClusterCensus, optional
        A census of the same lattice (after dropping zero couplings and empty classes) with at least
        `max_bonds` bonds, to skip the enumeration.

    Raises
    ------
    ParameterError
        max_bonds < 2, bad temperatures, tolerance or per, symbolic couplings or occupations.
    ResourceLimitError
        If the largest cluster's dense diagonalisation would exceed `memory_limit`; the message says which
        max_bonds fits.
    """
    if not isinstance(max_bonds, int) or max_bonds < 2:
        raise ParameterError(f"max_bonds {max_bonds!r}: the NLCE needs at least 2 bond orders for a band; "
                             "use max_bonds >= 2")
    if per not in PER_CHOICES:
        raise ParameterError(f"per {per!r}: use one of {', '.join(PER_CHOICES)}")
    if not tolerance > 0:
        raise ParameterError(f"tolerance must be > 0 (relative band half-width), got {tolerance}")
    if euler_start is not None and not 0 <= euler_start <= max_bonds - 2:
        raise ParameterError(f"euler_start {euler_start}: use an index between 0 and max_bonds - 2 = "
                             f"{max_bonds - 2}")
    grid = _grid(temperatures)
    occupation = {c: _numeric(p, f"occupation of {c}") for c, p in model.occupation.items()}
    couplings = {label: (_numeric(c.xy, f"coupling {label}.xy"), _numeric(c.z, f"coupling {label}.z"))
                 for label, c in model.couplings.items()}
    spec = lattice.without_labels([label for label, (xy, z) in couplings.items() if xy == 0 and z == 0])
    spec = spec.without_classes([c for c, p in occupation.items() if p == 0])
    if not spec.bonds:
        raise ParameterError(f"lattice {lattice.name!r} has no bonds left (all couplings or occupations are zero)")
    bonded = {spec.sites[b.source].site_class for b in spec.bonds} | {spec.sites[b.target].site_class
                                                                     for b in spec.bonds}
    check_cluster_size(max_bonds, max(int(2 * model.spin[c]) for c in bonded), memory_limit, max(1, workers))

    start = time.perf_counter()
    if census is not None and (census.lattice, census.site_classes, census.labels) != (
            spec.name, tuple(spec.site_classes), tuple(spec.labels)):
        raise ParameterError(f"census of {census.lattice!r} with labels {', '.join(census.labels)} does not match "
                             f"{spec.name!r} with the nonzero labels {', '.join(spec.labels)}; enumerate the "
                             "lattice without its zero couplings, or pass census=None")
    if census is None or census.max_bonds < max_bonds:
        census = enumerate_clusters(spec, max_bonds, workers=workers)
    enumeration_s = time.perf_counter() - start
    site_classes = list(census.site_classes)
    labels = list(census.labels)

    def vertex_value(class_index: int):
        name = site_classes[class_index]
        return (model.spin[name], _numeric(model.anisotropy.get(name, Fraction(0)), f"anisotropy of {name}"))

    book = LinkedWeights(grid, workers=workers)
    total = np.zeros((len(PROPERTIES), grid.size))
    occupied = Fraction(0)
    for name in site_classes:
        n_c = len(spec.sites_of_class(name))
        if n_c and occupation[name]:
            site = book.site_key(vertex_value(site_classes.index(name)))
            total += n_c * float(occupation[name]) * book.weight(site)
            occupied += n_c * occupation[name]
    divisor = {"site": spec.n_sites, "cell": 1, "magnetic": occupied}[per]
    if divisor == 0:
        raise ParameterError("per magnetic: no occupied sites (all occupations are 0)")

    sums, seconds, classes_per_order = [], [], []
    for n in range(1, max_bonds + 1):
        tick = time.perf_counter()
        members = []
        for gc in census.classes_with_bonds(n):
            g = gc.graph
            vg = make_valued(g.n_vertices, [vertex_value(c) for c in g.vertex_colours],
                             [(u, v, couplings[labels[col]]) for u, v, col in g.edges])
            dilution = float(np.prod([float(occupation[site_classes[c]]) for c in g.vertex_colours]))
            members.append((vg, gc.per_cell * dilution))
        book.ensure([vg for vg, _ in members])
        for vg, factor in members:
            if factor:
                total += factor * book.weight(vg.key)
            book.own.pop(vg.key, None)  # P(G) is needed only for W(G)
        sums.append(total / float(divisor))
        seconds.append(time.perf_counter() - tick)
        classes_per_order.append(len(members))

    stacked = np.array(sums)  # (orders, properties, T)
    rows = {name: stacked[:, i, :] for i, name in enumerate(PROPERTIES)}
    partial_sums = {"lnZ": rows["lnZ"], "chi": rows["M2"] / grid, "C": rows["C"], "S": rows["S"], "E": rows["E"]}
    start_index = max_bonds // 2 if euler_start is None else euler_start
    estimates, curves, t_conv = {}, {}, {}
    for name in CURVES:
        candidates = _resum(partial_sums[name], start_index)
        stack = np.array(list(candidates.values()))
        centre = candidates.get("wynn", candidates["bare"])
        band = Band(centre, np.minimum(stack.min(axis=0), centre), np.maximum(stack.max(axis=0), centre))
        estimates[name], curves[name] = candidates, band
        t_conv[name] = convergence_temperature(grid, band, tolerance)
    coupling_text = {}
    for label, (xy, z) in couplings.items():
        coupling_text.update({label: str(xy)} if xy == z else {f"{label}.xy": str(xy), f"{label}.z": str(z)})
    metadata = {"lattice": lattice.name, "model": model.kind, "spin": {c: str(s) for c, s in model.spin.items()},
                "couplings": coupling_text, "occupation": {c: str(p) for c, p in occupation.items()}, "per": per}
    stats = {"enumeration_s": enumeration_s, "graph_classes": classes_per_order,
             "largest_cluster_sites": max(gc.n_sites for gc in census.classes if gc.n_bonds <= max_bonds)}
    return NLCEResult(grid, per, list(range(1, max_bonds + 1)), partial_sums, estimates, curves, t_conv, tolerance,
                      seconds, stats, metadata)
