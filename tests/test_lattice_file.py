"""Lattice files: the built-in lattices against their defining geometry, and the loader's error messages.

Bond sets are compared with neighbours found by brute force in the test (all pairs of sites in a block of
cells, by distance), never with the loader's own shell search.
"""

import hashlib
import itertools
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from hte.errors import LatticeFileError, ParameterError
from hte.lattice import Bond, LatticeSpec, Site
from hte.lattice_file import LATTICE_DIR, builtin_lattices, load_lattice

DATA = Path(__file__).parent / "data" / "lattices"

# Coordination number per coupling label, magnetic sites.  Source: common practice (the defining geometry of
# each lattice: chain 2, square 4 and 4 diagonal, triangular 6, honeycomb 3, kagome 4, checkerboard 4 edges and
# 2 crossed-plaquette diagonals, simple cubic 6, bcc 8, pyrochlore 6, two-leg ladder 2 along the legs, 1 rung).
COORDINATION = {
    "chain": {"J1": 2},
    "square": {"J1": 4, "J2": 4},
    "triangular": {"J1": 6},
    "honeycomb": {"J1": 3},
    "kagome": {"J1": 4, "J2": 4, "J3": 2},
    "checkerboard": {"J1": 4, "J2": 2},
    "cubic": {"J1": 6},
    "bcc": {"J1": 8},
    "pyrochlore": {"J1": 6},
    "ladder": {"J1": 2, "Jrung": 1},
    "kagome-layered": {"J1": 4, "Jd": 2, "Jperp": 2, "J2": 4},
}
# Bond length per label, nearest-neighbour distance 1.  Source: common practice (geometry of each lattice:
# square diagonal sqrt(2); kagome second neighbour sqrt(3), across the hexagon 2; checkerboard diagonal sqrt(2);
# kagome-layered: interlayer site 1 above a triangle centre, 1/sqrt(3) from each corner in plane, so
# sqrt(1 + 1/3) = 2/sqrt(3); plane spacing 2).
BOND_LENGTH = {
    ("square", "J2"): np.sqrt(2),
    ("kagome", "J2"): np.sqrt(3),
    ("kagome", "J3"): 2.0,
    ("checkerboard", "J2"): np.sqrt(2),
    ("kagome-layered", "Jd"): 2 / np.sqrt(3),
    ("kagome-layered", "Jperp"): 2.0,
    ("kagome-layered", "J2"): np.sqrt(3),
}


def cartesian_points(spec: LatticeSpec, reach: int):
    """(site index, cell offset, Cartesian position) for all sites in the cells -reach..reach, by hand."""
    vectors = np.array(spec.vectors, dtype=float)
    for cell in itertools.product(range(-reach, reach + 1), repeat=spec.dimension):
        for i, site in enumerate(spec.sites):
            yield i, cell, np.array(site.position) + np.array(cell) @ vectors


def undirected(source, target, offset):
    """A bond as the set of its two orientations, so that reversed listings compare equal."""
    offset = tuple(int(n) for n in offset)
    return frozenset({(source, target, offset), (target, source, tuple(-n for n in offset))})


def brute_force_pairs(spec: LatticeSpec, distance: float, classes=("magnetic", "magnetic"), reach=3):
    """All translation classes of site pairs of the given classes at `distance` (tolerance 1e-6)."""
    found = set()
    for i, site in enumerate(spec.sites):
        origin = np.array(site.position)
        for j, cell, point in cartesian_points(spec, reach):
            pair_classes = {(site.site_class, spec.sites[j].site_class)}
            if pair_classes & {tuple(classes), tuple(reversed(classes))} and abs(
                    np.linalg.norm(point - origin) - distance) < 1e-6:
                found.add(undirected(i, j, cell))
    return found


def brute_force_distances(spec: LatticeSpec, reach=3):
    """Sorted distinct distances between magnetic sites (rounded to 1e-9), zero excluded."""
    distances = set()
    for i in spec.sites_of_class("magnetic"):
        origin = np.array(spec.sites[i].position)
        for j, _, point in cartesian_points(spec, reach):
            r = np.linalg.norm(point - origin)
            if spec.sites[j].site_class == "magnetic" and r > 1e-9:
                distances.add(round(float(r), 9))
    return sorted(distances)


def bonds_of(spec: LatticeSpec, label: str):
    return {undirected(b.source, b.target, b.offset) for b in spec.bonds if b.label == label}


# ------------------------------------------------------------------------------------------ built-ins
def test_builtin_names_are_the_required_ones():
    required = {"chain", "square", "triangular", "honeycomb", "kagome", "checkerboard", "cubic", "bcc",
                "pyrochlore", "ladder", "kagome-layered"}
    assert required <= set(builtin_lattices())


@pytest.mark.parametrize("name", builtin_lattices())
def test_builtin_loads_with_name_source_and_expectations(name):
    spec = load_lattice(name)
    assert spec.name == name
    assert spec.summary and spec.source
    text = (LATTICE_DIR / f"{name}.toml").read_text()
    assert "[expect]" in text
    assert spec.labels[0] == "J1" and spec.couplings["J1"] == 1
    assert spec.sha256 == hashlib.sha256((LATTICE_DIR / f"{name}.toml").read_bytes()).hexdigest()
    assert Path(spec.path) == (LATTICE_DIR / f"{name}.toml").resolve()


@pytest.mark.parametrize("name", sorted(COORDINATION))
def test_coordination_numbers_match_the_lattice_geometry(name):
    spec = load_lattice(name)
    per_site = spec.site_coordination()
    for label, z in COORDINATION[name].items():
        assert [per_site[i].get(label, 0) for i in spec.sites_of_class("magnetic")] == \
               [z] * len(spec.sites_of_class("magnetic")), label


@pytest.mark.parametrize("name", sorted(COORDINATION))
def test_bond_lengths_match_the_lattice_geometry(name):
    spec = load_lattice(name)
    for bond in spec.bonds:
        wanted = BOND_LENGTH.get((name, bond.label), 1.0)
        assert np.linalg.norm(spec.bond_vector(bond)) == pytest.approx(wanted, abs=1e-12), bond


@pytest.mark.parametrize("name", sorted(COORDINATION))
def test_nearest_neighbour_distance_is_one_and_every_nearest_neighbour_is_bonded(name):
    spec = load_lattice(name)
    assert brute_force_distances(spec)[0] == pytest.approx(1.0, abs=1e-9)
    unit_bonds = {undirected(b.source, b.target, b.offset) for b in spec.bonds
                  if abs(np.linalg.norm(spec.bond_vector(b)) - 1.0) < 1e-9}
    assert unit_bonds == brute_force_pairs(spec, 1.0)


@pytest.mark.parametrize("name", sorted(n for n in COORDINATION if n != "kagome-layered"))
def test_bonds_per_cell_is_coordination_times_sites_over_two(name):
    spec = load_lattice(name)
    assert spec.site_classes == ("magnetic",)
    for label, z in COORDINATION[name].items():
        assert 2 * spec.bonds_per_cell()[label] == z * spec.n_sites


@pytest.mark.parametrize("name", builtin_lattices())
def test_each_bond_of_the_infinite_lattice_appears_once(name):
    spec = load_lattice(name)
    keys = [undirected(b.source, b.target, b.offset) for b in spec.bonds]
    assert len(keys) == len(set(keys))


@pytest.mark.parametrize("name", builtin_lattices())
def test_builtin_is_connected_on_a_torus(name):
    # independent check with networkx: sites of a periodic block of L cells joined by all bonds
    spec = load_lattice(name)
    size = {1: 8, 2: 6, 3: 4}[spec.dimension]
    graph = nx.Graph()
    for cell in itertools.product(range(size), repeat=spec.dimension):
        for i in range(spec.n_sites):
            graph.add_node((i, cell))
        for b in spec.bonds:
            graph.add_edge((b.source, cell), (b.target, tuple((c + o) % size for c, o in zip(cell, b.offset))))
    assert nx.number_connected_components(graph) == 1


def test_square_bonds_equal_brute_force_shells_and_the_shell_file():
    # square: shell 1 at distance 1, shell 2 at sqrt(2) (common practice)
    spec = load_lattice("square")
    distances = brute_force_distances(spec)
    assert distances[:2] == pytest.approx([1.0, np.sqrt(2)])
    by_shells = load_lattice(DATA / "square_by_shells.toml")
    for shell, label in enumerate(("J1", "J2")):
        assert bonds_of(spec, label) == brute_force_pairs(spec, distances[shell])
        assert bonds_of(by_shells, label) == bonds_of(spec, label)


def test_kagome_bonds_equal_brute_force_shells_and_the_shell_file():
    # kagome: shells at 1, sqrt(3), 2 (common practice)
    spec = load_lattice("kagome")
    distances = brute_force_distances(spec)
    assert distances[:3] == pytest.approx([1.0, np.sqrt(3), 2.0])
    by_shells = load_lattice(DATA / "kagome_by_shells.toml")
    for shell, label in enumerate(("J1", "J2")):
        assert bonds_of(spec, label) == brute_force_pairs(spec, distances[shell])
        assert bonds_of(by_shells, label) == bonds_of(spec, label)


def test_kagome_j3_joins_opposite_corners_of_a_hexagon():
    # Of the 6 third neighbours of a kagome site at distance 2, 4 lie on the straight lines through the site
    # (the midpoint is a site) and 2 across a hexagon (the midpoint is the empty hexagon centre).
    # Source: common practice (kagome geometry).
    spec = load_lattice("kagome")
    points = [p for _, _, p in cartesian_points(spec, 4)]
    across, along = set(), set()
    for pair in brute_force_pairs(spec, 2.0):
        source, target, offset = min(pair)
        midpoint = (np.array(spec.sites[source].position) + spec.cartesian(target, offset)) / 2
        is_site = any(np.linalg.norm(midpoint - p) < 1e-9 for p in points)
        (along if is_site else across).add(pair)
    assert (len(across), len(along)) == (3, 6)  # per cell of 3 sites: 3*2/2 and 3*4/2
    assert bonds_of(spec, "J3") == across


def test_kagome_layered_interlayer_site_bonds_to_six_nearest_kagome_sites():
    spec = load_lattice("kagome-layered")
    (x,) = spec.sites_of_class("interlayer")
    # brute force: the nearest magnetic sites of X, with their heights relative to X
    origin = np.array(spec.sites[x].position)
    distances = sorted(
        (round(float(np.linalg.norm(p - origin)), 9), round(float(p[2] - origin[2]), 9))
        for j, _, p in cartesian_points(spec, 2) if spec.sites[j].site_class == "magnetic")
    nearest = [d for d in distances if d[0] == distances[0][0]]
    assert distances[0][0] == pytest.approx(2 / np.sqrt(3))
    assert sorted(h for _, h in nearest) == [-1.0] * 3 + [1.0] * 3
    assert bonds_of(spec, "Jd") == brute_force_pairs(spec, 2 / np.sqrt(3), ("interlayer", "magnetic"))
    assert spec.site_coordination()[x] == {"Jd": 6}
    assert spec.occupation == {"magnetic": 1, "interlayer": 0}
    assert spec.couplings == {"J1": 1, "Jd": 0, "Jperp": 0, "J2": 0}
    assert spec.spin == {"magnetic": "1/2", "interlayer": "1/2"}


def test_defaults_when_the_file_says_nothing():
    spec = load_lattice(DATA / "square_by_shells.toml")
    assert spec.couplings == {"J1": 1, "J2": 0}
    assert spec.occupation == {"magnetic": 1}
    assert spec.spin == {"magnetic": "1/2"}
    assert spec.sha256 == hashlib.sha256((DATA / "square_by_shells.toml").read_bytes()).hexdigest()


def test_sites_of_occupation_zero_still_connect_the_lattice():
    spec = load_lattice(str(DATA / "decorated_chain.toml"))
    assert spec.occupation == {"magnetic": 1, "interlayer": 0}
    assert spec.bonds_per_cell() == {"Jd": 2}


def test_reversed_listing_gives_the_same_canonical_bonds():
    forward = load_lattice("honeycomb")
    backward = load_lattice(DATA / "honeycomb_reversed.toml")
    assert backward.bonds == forward.bonds
    assert {undirected(b.source, b.target, b.offset) for b in backward.bonds} == brute_force_pairs(backward, 1.0)


@pytest.mark.parametrize("offsets, index", [
    ([(2, 0), (0, 1)], 2),
    ([(1, 1), (1, -1)], 2),
    ([(2, 0), (0, 2)], 4),
    ([(1, 2), (2, 1)], 3),
    ([(1, 0), (0, 1)], 1),
    ([(1, 0)], 0),
])
def test_translation_index_equals_components_on_a_torus(offsets, index):
    # independent check: a one-site lattice on a 12 x 12 torus has as many components as the index of the
    # group generated by the bond offsets (12 Z^2 lies inside every group of index 2, 3 or 4); rank 1 gives 12.
    spec = LatticeSpec(name="t", dimension=2, vectors=((1.0, 0.0), (0.0, 1.0)),
                       sites=(Site("A", (0.0, 0.0), "magnetic"),),
                       bonds=tuple(Bond("J1", 0, 0, o) for o in offsets), labels=("J1",), site_classes=("magnetic",))
    graph = nx.Graph()
    graph.add_nodes_from(itertools.product(range(12), repeat=2))
    for cell in itertools.product(range(12), repeat=2):
        for o in offsets:
            graph.add_edge(cell, ((cell[0] + o[0]) % 12, (cell[1] + o[1]) % 12))
    components = nx.number_connected_components(graph)
    assert spec.connectivity().translation_index == index
    assert components == (index if index else 12)


# ------------------------------------------------------------------------------------------ errors
@pytest.mark.parametrize("file, message", [
    ("syntax_error.toml", r"syntax_error.toml: TOML syntax error: .*line 6, column 1"),
    ("unknown_site.toml", r'\[\[bonds\]\] label "J1", pair 5 \("B" -> "D"\): site "D" is not defined; defined '
                          r"sites are A, B, C. Add D under \[sites\] or fix the pair"),
    ("self_bond.toml", r'pair 2 \("A" -> "A"\): bond from site "A" to itself in the same cell'),
    ("zero_length.toml", r'sites "A" and "B" \(cell offset \[-1, 0\]\) are at the same point .* zero length'),
    ("duplicate_reversed.toml", r'pair 3 \("B" -> "A", offset \[1, 0\]\): this bond is already given by '
                                r'\[\[bonds\]\] label "J1", pair 1 \("A" -> "B", offset \[-1, 0\]\)'),
    ("duplicate_across_labels.toml", r'\[\[bonds\]\] label "J2", shell 1 .*already given by \[\[bonds\]\] '
                                     r'label "J1", pair'),
    ("empty_shell.toml", r'label "J2", distance 1.5: no pair of magnetic-magnetic sites is at distance 1.5 '
                         r"\+- 1e-06; the distances that occur are 1, 1.41421, 2"),
    ("disconnected_offset2.toml", r"disconnected: the bonds reach only 1 in 2 cells, so the lattice falls apart "
                                  r"into 2 copies"),
    ("disconnected_site.toml", r'disconnected: no chain of bonds links site\(s\) "B" to site "A"'),
    ("disconnected_chains.toml", r"disconnected: the bonds never link cells along some direction"),
    ("missing_vector.toml", r"\[cell\]: wrong number of primitive vectors: dimension = 2 needs a1, a2, but a2 "
                            r"is missing"),
    ("extra_vector.toml", r'\[cell\]: unknown key "a3" in \[cell\] of a 2-dimensional lattice'),
    ("wrong_vector_length.toml", r"a1 has 3 components but the lattice has dimension 2; give 2 components"),
    ("unknown_key.toml", r'unknown key "lable" in a \[\[bonds\]\] entry; did you mean "label"\?'),
    ("bad_dimension_type.toml", r'dimension: expected the integer 1, 2 or 3, got the string "2"'),
    ("bad_offset_type.toml", r"pair 1 .*the cell offset must be a list of 2 integers, got \[1.0, 0\]"),
    ("bad_spin.toml", r'\[spin\] magnetic: expected a positive integer or half-integer .* got the string "1/3"'),
    ("bad_occupation.toml", r"\[occupation\] magnetic: expected a probability between 0 and 1, got the number 1.5"),
    ("unknown_coupling.toml", r"\[couplings\] J3: no bond has this label; labels are J1"),
    ("expect_coordination.toml", r'\[expect\]: coordination J1 = 6, but the bonds give 4 for site "A"'),
    ("expect_length.toml", r'\[expect\]: bond_length J1 = 1, but the bond "A" -> "A" \(offset \[1, 1\]\) has '
                           r"length 1.41421"),
])
def test_malformed_file_raises_lattice_file_error_naming_file_and_entry(file, message):
    with pytest.raises(LatticeFileError, match=message) as caught:
        load_lattice(DATA / file)
    assert str(DATA / file) in str(caught.value)


def test_unknown_builtin_name_suggests_the_closest():
    with pytest.raises(ParameterError, match=r'unknown lattice "kagom": did you mean "kagome"\?'):
        load_lattice("kagom")


def test_missing_path_is_a_lattice_file_error():
    with pytest.raises(LatticeFileError, match=r"no such lattice file"):
        load_lattice("nowhere/none.toml")
