"""hte: high-temperature series expansions for quantum lattice spin models."""

__version__ = "0.1.0"
