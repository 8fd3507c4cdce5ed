"""Closed-form Laplacian spectra shared by the eigen-solver tests.

Source: A. E. Brouwer and W. H. Haemers, *Spectra of Graphs*, Springer 2012, ch. 1,
and F. Chung, *Spectral Graph Theory*, AMS 1997, ch. 1 (section numbers from memory);
every formula re-checked numerically in ../shared/CHECKS.md. ``_l`` is the spectrum of
L = D - A, ``_n`` that of N = I - D^-1/2 A D^-1/2, unsorted.
"""

from __future__ import annotations

from math import comb

import numpy as np


def path_l(n: int) -> np.ndarray:
    return 2 - 2 * np.cos(np.pi * np.arange(n) / n)


def path_n(n: int) -> np.ndarray:
    return 1 - np.cos(np.pi * np.arange(n) / (n - 1))


def cycle_l(n: int) -> np.ndarray:
    return 2 - 2 * np.cos(2 * np.pi * np.arange(n) / n)


def cycle_n(n: int) -> np.ndarray:
    return 1 - np.cos(2 * np.pi * np.arange(n) / n)


def complete_l(n: int) -> np.ndarray:
    return np.r_[0.0, np.full(n - 1, float(n))]


def complete_n(n: int) -> np.ndarray:
    return np.r_[0.0, np.full(n - 1, n / (n - 1))]


def bipartite_l(m: int, n: int) -> np.ndarray:
    return np.r_[0.0, np.full(n - 1, float(m)), np.full(m - 1, float(n)), m + n]


def bipartite_n(m: int, n: int) -> np.ndarray:
    return np.r_[0.0, np.ones(m + n - 2), 2.0]


def star_l(leaves: int) -> np.ndarray:
    return np.r_[0.0, np.ones(leaves - 1), leaves + 1.0]


def star_n(leaves: int) -> np.ndarray:
    return np.r_[0.0, np.ones(leaves - 1), 2.0]


def hypercube_l(d: int) -> np.ndarray:
    return np.concatenate([np.full(comb(d, j), 2.0 * j) for j in range(d + 1)])


def grid_l(m: int, n: int) -> np.ndarray:
    return np.add.outer(path_l(m), path_l(n)).ravel()  # Cartesian product: sums


def torus_l(m: int, n: int) -> np.ndarray:
    return np.add.outer(cycle_l(m), cycle_l(n)).ravel()
