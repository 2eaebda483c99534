"""Independent reference for tests: exact spectrum of the spin-1/2 Heisenberg ring, built from bit strings.

No part of hte is used: H = sum_i S_i.S_{i+1} (J = 1) is assembled per S^z block with numpy and diagonalised
densely, so tests can compare the engine with an exact finite-size result by an independent route.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np


def ring_spectrum(length: int):
    """Eigenvalues and S^z of every eigenstate of the spin-1/2 Heisenberg ring of `length` sites."""
    energies, magnetisations = [], []
    for up in range(length + 1):
        states = [sum(1 << i for i in chosen) for chosen in combinations(range(length), up)]
        index = {s: k for k, s in enumerate(states)}
        matrix = np.zeros((len(states), len(states)))
        for k, s in enumerate(states):
            for i in range(length):
                j = (i + 1) % length
                a, b = (s >> i) & 1, (s >> j) & 1
                matrix[k, k] += 0.25 if a == b else -0.25
                if a != b:
                    matrix[index[s ^ (1 << i) ^ (1 << j)], k] += 0.5
        energies.append(np.linalg.eigvalsh(matrix))
        magnetisations.append(np.full(len(states), up - length / 2))
    return np.concatenate(energies), np.concatenate(magnetisations)
