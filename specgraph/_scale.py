"""Affinities at a safe scale: extreme but finite weights never overflow or vanish.

A network's affinities may be given in any unit, up to the largest finite
float64 (about 1.8e308). Spectral zoning only needs them up to a common factor:
the normalized Laplacian, its eigenvalues, the normalized cut and the
conductance do not change when every affinity is multiplied by the same number.
Its sums and products do not share that indifference: the degree of a node
holding a link of 1e308 overflows, a product of two zone volumes of 1e200
overflows, and a product of two volumes of 1e-200 underflows to zero and is
then divided by.

So a :class:`~specgraph.Network` whose largest affinity lies outside
``[2**-WEIGHT_BAND_EXPONENT, 2**WEIGHT_BAND_EXPONENT]`` holds its affinities
divided by a power of two, ``2**weight_exponent``, that brings the largest into
``[1, 2)``. Multiplying by a power of two is exact in binary floating point
(only the exponent changes), so no affinity is rounded; every stage after the
network (operator, eigen-solve, sweeps, refinement, figures) works at that scale,
and the absolute figures written for the user (zone volumes, internal and
boundary weights) are multiplied back with :func:`user_units`.

Two things cannot be held at one scale, and are said, never hidden:

* a network whose total volume (twice the sum of its affinities) exceeds the
  largest float64 in the user's own units cannot have its zone volumes written:
  it is refused on reading, naming the file and the line of the largest weight
  (or of the parallel links whose sum alone overflows), with what to do;
* an affinity that would fall below float64's smallest normal number at that
  scale (below ``2**NEGLIGIBLE_EXPONENT`` times the power of two at or below
  the largest affinity) would lose its digits or become zero: such a link is
  *negligible*, left out of the adjacency like a zero-weight link (its ends
  stay in the network), counted in the notes as
  ``negligible_weight_links_dropped`` and warned about (see
  ``docs/input-policy.md``).

This is a shared low-level module: it imports only numpy.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = [
    "NEGLIGIBLE_EXPONENT",
    "WEIGHT_BAND_EXPONENT",
    "in_band",
    "negligible_mask",
    "overflow_threshold",
    "scale_sentence",
    "top_exponent",
    "user_units",
]

#: Affinities whose largest lies in ``[2**-128, 2**128]`` (about 2.9e-39 to
#: 3.4e38, the range of a float32, which holds every unit in ordinary use) are
#: kept exactly as given, so such networks give bit-for-bit the results they
#: always gave. Inside that band nothing overflows or underflows: a zone volume
#: is at most ``2 * links * 2**128``, below ``2**169`` for 10^12 links, so a
#: product of three volumes stays below ``2**507``. Outside it the failures are
#: measured: a cycle with one weight of 1e308 lost an eigenvector to an
#: overflowing norm (a spurious zero eigenvalue) and ended with NaN volumes; a
#: cycle whose weights are all near 1e-290 ended in a division by zero in the
#: boundary refinement (products of two volumes underflowed to 0).
WEIGHT_BAND_EXPONENT = 128

#: A link is negligible when its affinity is below ``2**NEGLIGIBLE_EXPONENT``
#: times the power of two at or below the largest affinity: at the network's
#: safe scale (largest in ``[1, 2)``) it would fall below float64's smallest
#: normal number, 2**-1022 (about 2.2e-308), and lose its digits or become zero
#: (so a weight ratio smallest/largest below about 2.2e-308 to 4.5e-308). A
#: cycle alternating weights of 1 and 1e-300 (ratio above the bound) zones
#: with every figure finite; alternating 1e300 and 1e-300 (ratio 1e-600, below
#: it) cannot be held at one scale.
NEGLIGIBLE_EXPONENT = -1022

#: The exponent range of float64: ``2**MAX_EXPONENT`` overflows, and
#: ``2**MIN_EXPONENT`` is the smallest subnormal number.
MAX_EXPONENT = 1024
MIN_EXPONENT = -1074


def top_exponent(values: np.ndarray) -> int:
    """The exponent ``e`` with ``max(values)`` in ``[2**(e-1), 2**e)`` (0 without positive values).

    Examples
    --------
    >>> top_exponent(np.array([1.0, 3.0])), top_exponent(np.array([1e308]))
    (2, 1024)
    >>> top_exponent(np.array([]))
    0
    """
    if values.size == 0:
        return 0
    largest = float(values.max())
    if not largest > 0:
        return 0
    return int(math.frexp(largest)[1])


def in_band(top: int) -> bool:
    """Whether a largest affinity of exponent ``top`` is kept as given (the band).

    Examples
    --------
    >>> in_band(2), in_band(1024), in_band(-1000)
    (True, False, False)
    """
    return -WEIGHT_BAND_EXPONENT < top <= WEIGHT_BAND_EXPONENT


def negligible_mask(values: np.ndarray, top: int) -> np.ndarray:
    """Positive ``values`` below ``2**(top - 1 + NEGLIGIBLE_EXPONENT)``: the negligible ones.

    ``top`` is the :func:`top_exponent` of the largest value.

    Compared against an exact power of two, so the answer does not change when
    every value is multiplied by the same power of two.

    Examples
    --------
    >>> negligible_mask(np.array([1e300, 1e-300, 0.0, 1.0]), 997).tolist()
    [False, True, False, False]
    """
    floor_exponent = top - 1 + NEGLIGIBLE_EXPONENT
    if floor_exponent < MIN_EXPONENT:  # every float above zero is at least 2**-1074
        return np.zeros(values.shape, dtype=bool)
    return (values > 0) & (values < math.ldexp(1.0, floor_exponent))


def overflow_threshold(exponent: int) -> float:
    """The smallest value ``x`` at which ``x * 2**exponent`` overflows float64 (inf if none).

    Examples
    --------
    >>> overflow_threshold(1024), overflow_threshold(0), overflow_threshold(-5)
    (1.0, inf, inf)
    """
    room = MAX_EXPONENT - exponent
    return math.ldexp(1.0, room) if room < MAX_EXPONENT else math.inf


def user_units(values: Any, exponent: int) -> Any:
    """``values * 2**exponent``, exactly (:func:`numpy.ldexp`): stored sums in the units given.

    Examples
    --------
    >>> float(user_units(0.5, 1024)), user_units(np.array([1.0, 2.0]), 0).tolist()
    (8.98846567431158e+307, [1.0, 2.0])
    """
    if exponent == 0:
        return values
    out = np.ldexp(values, exponent)
    return float(out) if np.ndim(out) == 0 else out


def scale_sentence(exponent: int) -> str:
    """The run record's words for the scale of the affinities (empty when it is 1).

    Examples
    --------
    >>> scale_sentence(0)
    ''
    >>> scale_sentence(1024)[:60]
    'the link affinities were divided by 2^1024 (about 1.8e+308) '
    """
    if exponent == 0:
        return ""
    decades = exponent * math.log10(2.0)
    power = math.floor(decades)
    about = f"{10.0 ** (decades - power):.2g}e{power:+d}"
    return (
        f"the link affinities were divided by 2^{exponent} (about {about}) before the "
        "operator, the eigen-solve and the zone figures, so that no sum or product "
        "overflows or vanishes; a power of two changes no digit, the zones and the "
        "scale-free figures (normalized cut, conductance, eigenvalues of the normalized "
        "operators) do not depend on it, and volumes and weights are written in the "
        "units given"
    )
