"""Before a long run: estimate its time and memory from cluster counts and a measured kernel cost.

The estimate is deliberately simple and says so: the cluster and graph-class counts are enumerated exactly
up to the size where that takes about a second, then extrapolated with the last measured growth factors;
the enumeration time grows from the last probe's by the larger of the growth factors of the clusters kept and
of the probe's time (the census also walks clusters it drops); the kernel time of a cluster is a measured overhead
plus a measured unit times the square of its largest S^z sector (:func:`kernel_cost_model`); the memory is
the kernel's working set for the largest diagonalised cluster (sparse integer sector matrix and propagation
blocks) per worker, plus the main process's graph classes and exact weights (_CLASS_BYTES per class).
Clusters that the run never diagonalises are left out of both: trees (every bond a bridge) of `order` bonds,
of order - 1 >= 2 bonds and of order - 2 >= 3 bonds get their T chi and M4 weights from the bridge
factorisation (hte.bridge_factorisation; :func:`diagonalised` says where this errs), and with ln Z only a tree
of E bonds first contributes at beta^(2E) (every bridge appears twice), so the largest diagonalised cluster has
`order` sites rather than order + 1.  Expect the time to be right within a factor of a
few; the memory bound is the one that matters for refusing a run.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from fractions import Fraction

from hte.clusters import enumerate_clusters
from hte.errors import ResourceLimitError
from hte.exact import QUANTITIES
from hte.vanishing_weights import insertions_for

_PROBE_CLUSTERS = 200_000
_STEADY_S = 0.05  # probe censuses shorter than this are too noisy for a time growth factor
_PROBE_SECTOR = 2000  # the kernel-cost probe's largest sector (about 0.1-0.5 s at orders 10-18)
_BLOCK_BYTES = 3 * 2**20 * 8  # the kernel's propagation buffers (hte/exact.py)
# the main process: Python, numpy, numba and hte, then per graph class its census entry, valued graphs and exact
# weights; measured on the symbolic layered kagome (ln Z and T chi) at orders 9 and 10, 2026-12-02: 1.6 GiB for
# 2.1e5 classes, 8.3 GiB for 1.17e6, i.e. about 7.2 KiB per class on about 0.2 GiB
_BASE_BYTES = 200 * 2**20
_CLASS_BYTES = 8 * 2**10


@dataclass
class RunEstimate:
    """Projected cost of a series run (numbers are estimates; see the module docstring)."""

    order: int
    clusters: int
    graph_classes: int
    enumeration_s: float
    kernel_s: float
    largest_sector: int
    memory_bytes: int
    extrapolated_from: int
    main_bytes: int = 0  # the main process (graph classes and their weights)

    @property
    def seconds(self) -> float:
        return self.enumeration_s + self.kernel_s

    def describe(self) -> str:
        return (f"estimate for order {self.order}: about {self.clusters:.3g} clusters per cell in "
                f"{self.graph_classes:.3g} graph classes (counted to {self.extrapolated_from} bonds, extrapolated "
                f"beyond); enumeration ~{_duration(self.enumeration_s)}, cluster series ~{_duration(self.kernel_s)}; "
                f"largest S^z sector {self.largest_sector:,} states, kernel memory "
                f"~{self.memory_bytes / 2**30:.2f} GiB per worker, main process ~{self.main_bytes / 2**30:.1f} GiB")


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    if seconds < 2 * 86400:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.3g} days"


def largest_sector(n_sites: int, twice_spin: int) -> int:
    """Dimension of the largest S^z sector of n_sites spins S = twice_spin/2 (coefficient of a polynomial)."""
    counts = [1]
    for _ in range(n_sites):
        nxt = [0] * (len(counts) + twice_spin)
        for i, c in enumerate(counts):
            for k in range(twice_spin + 1):
                nxt[i + k] += c
        counts = nxt
    return max(counts)


def available_memory() -> int:
    """Physical memory of this machine in bytes."""
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return 8 * 2**30


def diagonalised(n_bonds: int, n_sites: int, order: int, lnz_only: bool) -> bool:
    """Whether a run to `order` diagonalises a graph class of n_bonds bonds on n_sites sites.

    Trees (n_sites = n_bonds + 1) are skipped at the top order, one bond below it with two bonds or more, and
    two bonds below it with three bonds or more (bridge factorisation), and, for ln Z alone, whenever
    2 n_bonds > order.  Two bonds below the top order the run still diagonalises the stars (no bond of a star
    separates two others), which are skipped here: an error on the cheap side, and a small one, since a star of
    order - 2 bonds exists only where order - 2 is at most the lattice's coordination number.  Graphs with
    cycles and bridges that the run skips are counted here: an error on the expensive side.
    """
    if n_sites != n_bonds + 1:
        return True
    if lnz_only:
        return 2 * n_bonds <= order
    below_top = order - n_bonds  # the factorisation reaches 0, 1 or 2 bonds below with that many bridges + 1
    return below_top > 2 or n_bonds < below_top + 1


def estimate_run(spec, model, order: int, workers: int = 1, quantities=QUANTITIES,
                 biconnected_only: bool = False) -> RunEstimate:
    """Estimate time and memory of the series run of `model` on `spec` to `order` (see module docstring) for
    `quantities` (names of :data:`hte.exact.QUANTITIES`); `biconnected_only` when only biconnected clusters are
    enumerated (:func:`hte.expansion.star_graphs_suffice`).  The probe censuses keep, like the run's, only the
    clusters whose weights can be nonzero at their own top order (:mod:`hte.vanishing_weights`)."""
    lnz_only = tuple(quantities) == ("lnz",)
    twice_spin = max(int(2 * s) for s in model.spin.values())
    counts, classes, seconds = [], [], []
    n = 0
    while n < order:
        n += 1
        start = time.perf_counter()
        census = enumerate_clusters(spec, n, biconnected_only=biconnected_only,
                                    insertions=insertions_for(quantities))
        seconds.append(time.perf_counter() - start)
        counts.append(sum(census.clusters_per_cell))
        classes.append(len(census.classes))
        if counts[-1] > _PROBE_CLUSTERS:
            break
    growth = counts[-1] / counts[-2] if len(counts) > 1 and counts[-2] else 1.0
    class_growth = classes[-1] / classes[-2] if len(classes) > 1 and classes[-2] else 1.0
    # the census walks clusters it does not keep (hte.vanishing_weights), and their number grows faster than the
    # number kept: the time grows by the larger of the two measured factors
    time_growth = seconds[-1] / seconds[-2] if len(seconds) > 1 and seconds[-2] > _STEADY_S else growth
    total, n_classes, enum_s = counts[-1], classes[-1], seconds[-1]
    last_count, last_classes, last_s = counts[-1], classes[-1], seconds[-1]
    for _ in range(n + 1, order + 1):
        last_count *= growth
        last_classes *= class_growth
        last_s *= max(growth, time_growth)
        total += last_count
        n_classes += last_classes
        enum_s += last_s
    # kernel: time real classes of the largest affordable size, scale by the square of the largest sector
    diagonal = all(c.xy == 0 for label, c in model.couplings.items() if label in spec.labels)
    kernel_s = _kernel_seconds(census, order, twice_spin, class_growth, lnz_only, diagonal)
    top = largest_sector(order, twice_spin)
    memory = top * (order + 2) * 16 + _BLOCK_BYTES + top * 64
    return RunEstimate(order, int(total), int(n_classes), enum_s / max(workers, 1), kernel_s / max(workers, 1),
                       top, int(memory), n, int(_BASE_BYTES + n_classes * _CLASS_BYTES))


def _path_seconds(n_sites: int, twice_spin: int, order: int, diagonal: bool = False) -> float:
    """Wall time of the exact kernel on an open path of n_sites spins to `order` (Heisenberg bonds, or Ising
    bonds if `diagonal`)."""
    from hte.exact import ClusterHamiltonian, cluster_cumulants

    spin = Fraction(twice_spin, 2)
    jxy = Fraction(0) if diagonal else Fraction(1)
    ham = ClusterHamiltonian(spins=(spin,) * n_sites,
                             bonds=tuple((i, i + 1, jxy, Fraction(1)) for i in range(n_sites - 1)))
    start = time.perf_counter()
    cluster_cumulants(ham, order)
    return time.perf_counter() - start


def kernel_cost_model(twice_spin: int, order: int, diagonal: bool = False) -> tuple[float, float]:
    """(overhead s, s per unit of size): kernel time of a cluster ~ overhead + unit * size, the size being the
    square of its largest S^z sector, or its number of states when H0 is diagonal (every Jxy = 0: the kernel
    then sums the diagonal directly, :mod:`hte.exact`).

    Both are measured at the run's order (the number of primes and of propagation steps grow with it): the
    overhead on a two-site cluster, the unit on the longest path whose largest sector has at most
    _PROBE_SECTOR states.
    """
    _path_seconds(2, twice_spin, order, diagonal)  # compile and warm up
    overhead = _path_seconds(2, twice_spin, order, diagonal)
    sites = 2
    while largest_sector(sites + 1, twice_spin) <= _PROBE_SECTOR:
        sites += 1
    seconds = max(_path_seconds(sites, twice_spin, order, diagonal) - overhead, 0.0)
    return overhead, seconds / _kernel_size(sites, twice_spin, diagonal)


def _kernel_size(n_sites: int, twice_spin: int, diagonal: bool) -> int:
    """The size that the kernel's time grows with (:func:`kernel_cost_model`)."""
    return (twice_spin + 1) ** n_sites if diagonal else largest_sector(n_sites, twice_spin) ** 2


def _kernel_seconds(census, order: int, twice_spin: int, class_growth: float, lnz_only: bool,
                    diagonal: bool = False) -> float:
    """Projected kernel time: the cost model of :func:`kernel_cost_model` summed over the diagonalised classes."""
    overhead, unit = kernel_cost_model(twice_spin, order, diagonal)
    # sites of the classes per size; beyond the census, each extra bond adds at most one site
    sizes: dict[int, list[int]] = {}
    for c in census.classes:
        sizes.setdefault(c.n_bonds, []).append(c.n_sites)
    top = max(sizes)
    total = 0.0
    for n in range(1, order + 1):
        if n in sizes:
            sites, factor = sizes[n], 1.0
        else:
            sites, factor = [k + (n - top) for k in sizes[top]], class_growth ** (n - top)
        total += factor * sum(overhead + unit * _kernel_size(k, twice_spin, diagonal)
                              for k in sites if diagonalised(n, k, order, lnz_only))
    return total


_HOPELESS_S = 30 * 24 * 3600.0  # a run projected beyond a month is refused too (it would never be waited for)


def check_memory(estimate: RunEstimate, workers: int, limit_bytes: int | None = None) -> None:
    """Raise ResourceLimitError (with the estimate) if the run cannot fit in memory or would take months."""
    if estimate.seconds > _HOPELESS_S:
        raise ResourceLimitError(
            f"{estimate.describe()}: far beyond a month on this machine. Lower --order, or add --force to try "
            "anyway (spread it over a cluster with --scheduler)")
    limit = limit_bytes or int(0.8 * available_memory())
    need = estimate.memory_bytes * max(workers, 1) + estimate.main_bytes
    if need > limit:
        raise ResourceLimitError(
            f"{estimate.describe()}; with {workers} worker(s) that is ~{need / 2**30:.1f} GiB in all, more than the "
            f"{limit / 2**30:.1f} GiB available. Lower --order, use fewer --workers, or add --force to try anyway.")
