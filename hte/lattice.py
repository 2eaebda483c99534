"""Lattice geometry: primitive vectors, basis sites with site classes, labelled bonds.

A :class:`LatticeSpec` knows nothing about spins or Hamiltonians.  Positions are Cartesian, in the length
unit of the lattice file (usually the nearest-neighbour distance).  A bond joins basis site ``source`` in the
home cell to basis site ``target`` in the cell displaced by ``offset`` (integer multiples of the primitive
vectors); every bond of the infinite lattice is a translate of exactly one entry of ``bonds``.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from fractions import Fraction

import numpy as np


@dataclass(frozen=True)
class Site:
    """A basis site: its name in the lattice file, Cartesian position and site class."""

    name: str
    position: tuple[float, ...]
    site_class: str


@dataclass(frozen=True)
class Bond:
    """A bond of the unit cell: ``source`` (home cell) to ``target`` in the cell shifted by ``offset``."""

    label: str
    source: int
    target: int
    offset: tuple[int, ...]


@dataclass(frozen=True)
class LatticeSpec:
    """A periodic lattice with site classes and coupling labels.

    Attributes
    ----------
    vectors : tuple of tuples
        Primitive vectors a_1..a_d, Cartesian.
    sites : tuple of Site
        Basis sites of one unit cell.
    bonds : tuple of Bond
        One representative per translation class of bonds.
    labels : tuple of str
        Coupling labels in file order; the first is the reference coupling (its value sets the energy unit).
    site_classes : tuple of str
        Site classes in file order.
    couplings : dict
        Default value per coupling label (numbers).
    occupation : dict
        Default occupation probability per site class (numbers in [0, 1]).
    spin : dict
        Default spin per site class, as a string such as "1/2".
    """

    name: str
    dimension: int
    vectors: tuple[tuple[float, ...], ...]
    sites: tuple[Site, ...]
    bonds: tuple[Bond, ...]
    labels: tuple[str, ...]
    site_classes: tuple[str, ...]
    couplings: dict = field(default_factory=dict)
    occupation: dict = field(default_factory=dict)
    spin: dict = field(default_factory=dict)
    summary: str = ""
    source: str = ""
    path: str = ""
    sha256: str = ""

    # ------------------------------------------------------------------ geometry
    @property
    def n_sites(self) -> int:
        """Number of basis sites per unit cell (all classes)."""
        return len(self.sites)

    def cartesian(self, site: int, cell) -> np.ndarray:
        """Cartesian position of basis site `site` in the cell with integer coordinates `cell`."""
        vectors = np.asarray(self.vectors, dtype=float)
        return np.asarray(self.sites[site].position, dtype=float) + np.asarray(cell, dtype=float) @ vectors

    def bond_vector(self, bond: Bond) -> np.ndarray:
        """Cartesian vector from the source site to the target site of `bond`."""
        return self.cartesian(bond.target, bond.offset) - self.cartesian(bond.source, (0,) * self.dimension)

    def sites_of_class(self, site_class: str) -> list[int]:
        """Indices of the basis sites of one class."""
        return [i for i, s in enumerate(self.sites) if s.site_class == site_class]

    def coordination(self) -> dict[tuple[str, str], Fraction]:
        """Mean number of `label` bonds per site of class `c`, keyed by (c, label), exact."""
        counts: dict[tuple[str, str], int] = {}
        for bond in self.bonds:
            for end in (bond.source, bond.target):
                key = (self.sites[end].site_class, bond.label)
                counts[key] = counts.get(key, 0) + 1
        result = {}
        for (site_class, label), n in counts.items():
            result[(site_class, label)] = Fraction(n, len(self.sites_of_class(site_class)))
        return result

    def site_coordination(self) -> list[dict[str, int]]:
        """For each basis site, the number of bonds of each label that touch it."""
        per_site: list[dict[str, int]] = [dict() for _ in self.sites]
        for bond in self.bonds:
            for end in (bond.source, bond.target):
                per_site[end][bond.label] = per_site[end].get(bond.label, 0) + 1
        return per_site

    def bonds_per_cell(self) -> dict[str, int]:
        """Number of bonds of each label per unit cell."""
        counts: dict[str, int] = {label: 0 for label in self.labels}
        for bond in self.bonds:
            counts[bond.label] += 1
        return counts

    # ------------------------------------------------------------------ selections
    def without_labels(self, dropped) -> "LatticeSpec":
        """The same lattice with all bonds of the labels in `dropped` removed (e.g. couplings set to 0)."""
        dropped = set(dropped)
        return replace(
            self,
            bonds=tuple(b for b in self.bonds if b.label not in dropped),
            labels=tuple(l for l in self.labels if l not in dropped),
        )

    def without_classes(self, dropped) -> "LatticeSpec":
        """The same lattice without the bonds that touch a site of a class in `dropped` (occupation 0).

        The sites themselves stay (they still count in the per-site normalisation of the undiluted lattice).
        """
        dropped = set(dropped)
        keep = [
            b
            for b in self.bonds
            if self.sites[b.source].site_class not in dropped and self.sites[b.target].site_class not in dropped
        ]
        labels = tuple(l for l in self.labels if any(b.label == l for b in keep))
        return replace(self, bonds=tuple(keep), labels=labels)
