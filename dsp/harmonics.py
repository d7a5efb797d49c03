"""Harmonic balance of the sounding note: H1..H8 re the strongest, and odd/even energy ratio."""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import NDArray

__all__ = ["FLOOR_DB", "N_REPORTED", "balance_row"]

N_REPORTED = 8
"""Harmonics reported (H1..H8)."""

FLOOR_DB = -120.0
"""Lowest level reported, dB re the strongest harmonic (absent harmonics read this)."""

_FLOOR_RATIO = 10.0 ** (FLOOR_DB / 20.0)
_ODD_EVEN_LIMIT_DB = 120.0


@njit(cache=True, nogil=True)
def balance_row(amp: NDArray[np.float64], levels_db: NDArray[np.float64]) -> float:
    """H1..H8 of one frame in dB re the strongest into ``levels_db``; returns odd/even (dB).

    ``amp``: amplitudes of harmonics 1..n (n >= 8). Levels are 0 for the strongest and
    never below ``FLOOR_DB`` (the floor applied before the logarithm: no log of zero for
    silence). Odd/even: ``10 log10(sum of odd H^2 / sum of even H^2)`` over H1..H8,
    clipped to +-120 dB; 0 when both sums are 0. A stopped pipe (odd harmonics only;
    Fletcher & Rossing, *The Physics of Musical Instruments*, 1998) reads large and positive.

    Examples
    --------
    >>> levels = np.empty(8)
    >>> balance_row(np.array([1.0, 1.0, 1.0, 1.0, 0, 0, 0, 0]), levels)
    0.0
    >>> levels[:3].round(2).tolist()
    [0.0, 0.0, 0.0]
    """
    top = 0.0
    for k in range(N_REPORTED):
        if amp[k] > top:  # noqa: PLR1730  numba kernel: kept as written
            top = amp[k]
    scale = 1.0 / top if top > 0.0 else 1.0
    odd = 0.0
    even = 0.0
    for k in range(N_REPORTED):
        a = amp[k]
        levels_db[k] = 20.0 * math.log10(max(a * scale, _FLOOR_RATIO))
        if k % 2 == 0:
            odd += a * a
        else:
            even += a * a
    if odd == 0.0 and even == 0.0:
        return 0.0
    if even == 0.0:
        return _ODD_EVEN_LIMIT_DB
    if odd == 0.0:
        return -_ODD_EVEN_LIMIT_DB
    return min(max(10.0 * math.log10(odd / even), -_ODD_EVEN_LIMIT_DB), _ODD_EVEN_LIMIT_DB)
