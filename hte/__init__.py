"""hte: high-temperature series expansions for quantum lattice spin models.

The curated API (everything else lives in its own module)::

    import hte
    lattice = hte.load_lattice("kagome")
    series = hte.compute_series(lattice, order=10)                 # exact rationals, per site
    curves = hte.curves_from_series(series.to_json_dict(), "pade", temperatures=[0.5, 1.0, 2.0])

Conventions (see README.md): H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D (Sz)^2 - h sum_i Sz, each bond
once, J > 0 antiferromagnetic, k_B = 1, g mu_B = 1; temperatures in units of the reference coupling.
"""

__version__ = "0.1.0"

__all__ = [
    "load_lattice",
    "builtin_lattices",
    "enumerate_clusters",
    "canonical_key",
    "build_model",
    "compute_series",
    "HTSeries",
    "curves_from_series",
    "CurveSet",
    "pade",
    "entropy_method",
    "read_measurement",
    "fit_curie_weiss",
    "WeightCache",
]


def __getattr__(name):
    """Import the API lazily, so `import hte` stays fast and light."""
    locations = {
        "load_lattice": "hte.lattice_file",
        "builtin_lattices": "hte.lattice_file",
        "enumerate_clusters": "hte.clusters",
        "canonical_key": "hte.canonical",
        "build_model": "hte.models",
        "compute_series": "hte.series",
        "HTSeries": "hte.series",
        "curves_from_series": "hte.curves",
        "CurveSet": "hte.curves",
        "pade": "hte.pade",
        "entropy_method": "hte.entropy_method",
        "read_measurement": "hte.measured",
        "fit_curie_weiss": "hte.curie_weiss",
        "WeightCache": "hte.cache",
    }
    if name in locations:
        import importlib

        return getattr(importlib.import_module(locations[name]), name)
    raise AttributeError(f"module 'hte' has no attribute {name!r}")
