"""The pre-run estimate (hte.estimate): sector sizes, which clusters a run diagonalises, and refusals."""

from __future__ import annotations

from math import comb

import pytest

from hte.errors import ResourceLimitError
from hte.estimate import RunEstimate, check_memory, diagonalised, estimate_run, largest_sector
from hte.lattice_file import load_lattice
from hte.models import build_model


def test_largest_sector_is_the_central_multinomial_coefficient():
    # spin 1/2: the central binomial coefficient C(n, n/2) (common practice)
    for n in range(1, 19):
        assert largest_sector(n, 1) == comb(n, n // 2)
    # spin 1: central trinomial coefficients 1, 3, 7, 19, 51, 141 for n = 1..6 (OEIS A002426, from memory)
    assert [largest_sector(n, 2) for n in range(1, 7)] == [1, 3, 7, 19, 51, 141]
    # spin 5/2, two sites: 6 x 6 states, largest sector (total m = 0) has 6 states (common practice)
    assert largest_sector(2, 5) == 6


def test_trees_at_the_top_order_are_not_diagonalised():
    # bridge factorisation: a tree of E = order bonds (E + 1 sites) is never diagonalised, nor one of
    # order - 1 >= 2 bonds (two bridges), nor one of order - 2 >= 3 bonds (taken as not a star) ...
    assert not diagonalised(n_bonds=8, n_sites=9, order=8, lnz_only=False)
    assert not diagonalised(n_bonds=7, n_sites=8, order=8, lnz_only=False)
    assert not diagonalised(n_bonds=6, n_sites=7, order=8, lnz_only=False)
    assert not diagonalised(n_bonds=3, n_sites=4, order=5, lnz_only=False)
    # ... but three bonds below the top order it is, and so is a graph with a cycle, the single bond at order 2
    # and order 3, and the 2-bond path at order 4 (fewer bridges than the level needs)
    assert diagonalised(n_bonds=5, n_sites=6, order=8, lnz_only=False)
    assert diagonalised(n_bonds=8, n_sites=8, order=8, lnz_only=False)
    assert diagonalised(n_bonds=1, n_sites=2, order=2, lnz_only=False)
    assert diagonalised(n_bonds=1, n_sites=2, order=3, lnz_only=False)
    assert diagonalised(n_bonds=2, n_sites=3, order=4, lnz_only=False)
    # ln Z alone: a tree of E bonds starts at beta^(2E)
    assert diagonalised(n_bonds=4, n_sites=5, order=8, lnz_only=True)
    assert not diagonalised(n_bonds=5, n_sites=6, order=8, lnz_only=True)


def test_the_largest_diagonalised_chain_cluster_sets_the_memory():
    spec = load_lattice("chain")
    model = build_model(spec)
    estimate = estimate_run(spec, model, 10)
    # the 10-bond ring does not embed in the chain, the paths of 10, 9 and 8 bonds are factorised, so the open
    # 7-bond path would be the largest diagonalised cluster; the estimate keeps the bound of `order` sites
    assert estimate.largest_sector == comb(10, 5)
    assert estimate.clusters == 10 and estimate.graph_classes == 10   # one path per bond count per cell
    assert estimate.memory_bytes > 0 and estimate.seconds > 0


def _estimate(memory_bytes: int, seconds: float) -> RunEstimate:
    return RunEstimate(order=12, clusters=10**6, graph_classes=10**4, enumeration_s=seconds / 2,
                       kernel_s=seconds / 2, largest_sector=924, memory_bytes=memory_bytes, extrapolated_from=9)


def test_check_memory_refuses_runs_beyond_the_memory_limit_and_says_how_to_proceed():
    check_memory(_estimate(2**30, 60.0), workers=2, limit_bytes=3 * 2**30)   # 2 GiB of 3: accepted
    with pytest.raises(ResourceLimitError, match="with 4 worker"):
        check_memory(_estimate(2**30, 60.0), workers=4, limit_bytes=3 * 2**30)
    with pytest.raises(ResourceLimitError, match="--force"):
        check_memory(_estimate(2**20, 60.0 * 24 * 3600), workers=1, limit_bytes=3 * 2**30)


def test_check_memory_counts_the_main_process_as_well_as_the_workers():
    small_kernel = _estimate(2**20, 60.0)
    check_memory(small_kernel, workers=2, limit_bytes=3 * 2**30)
    small_kernel.main_bytes = 4 * 2**30  # the graph classes and their weights alone exceed the limit
    with pytest.raises(ResourceLimitError, match="in all"):
        check_memory(small_kernel, workers=2, limit_bytes=3 * 2**30)


def test_the_main_process_memory_grows_with_the_graph_classes():
    spec = load_lattice("kagome")
    model = build_model(spec)
    smaller, larger = (estimate_run(spec, model, order) for order in (6, 9))
    assert larger.graph_classes > smaller.graph_classes
    assert larger.main_bytes > smaller.main_bytes > 0
