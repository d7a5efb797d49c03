"""Harmonic balance of the sounding note: H1..H8 re the strongest, and odd/even energy ratio."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["harmonic_levels_db", "odd_even_db", "N_REPORTED", "FLOOR_DB"]

N_REPORTED = 8
"""Harmonics reported (H1..H8)."""

FLOOR_DB = -120.0
"""Lowest level reported, dB re the strongest harmonic (absent harmonics read this)."""

_FLOOR_RATIO = 10.0 ** (FLOOR_DB / 20.0)


def harmonic_levels_db(amp: NDArray[np.float64]) -> NDArray[np.float64]:
    """Levels of H1..H8 in dB relative to the strongest of them.

    Parameters
    ----------
    amp : ndarray of float, shape (n_frames, n >= 8)
        Amplitudes of harmonics 1..n.

    Returns
    -------
    ndarray of float, shape (n_frames, 8), dB
        0 for the strongest, never below ``FLOOR_DB``.

    Examples
    --------
    >>> harmonic_levels_db(np.array([[1.0, 0.5, 0.1, 0, 0, 0, 0, 0]]))[0, :3].round(2).tolist()
    [0.0, -6.02, -20.0]
    """
    a = amp[:, :N_REPORTED]
    top = a.max(axis=1, keepdims=True)
    # the floor applied before the logarithm (10^-6 = -120 dB): no log of zero to silence
    rel = np.maximum(a / np.where(top > 0.0, top, 1.0), _FLOOR_RATIO)
    db: NDArray[np.float64] = np.log10(rel)
    db *= 20.0
    return np.maximum(db, FLOOR_DB, out=db)


def odd_even_db(amp: NDArray[np.float64]) -> NDArray[np.float64]:
    """``10 log10(sum of odd H^2 / sum of even H^2)`` over H1..H8, clipped to +-120 dB.

    A stopped pipe (odd harmonics only; Fletcher & Rossing, *The Physics of Musical
    Instruments*, 1998) reads large and positive.

    Examples
    --------
    >>> round(float(odd_even_db(np.array([[1.0, 1.0, 1.0, 1.0, 0, 0, 0, 0]]))[0]), 2)
    0.0
    """
    a = amp[:, :N_REPORTED]
    a2 = a * a
    odd = np.add.reduce(a2[:, 0::2], 1)
    even = np.add.reduce(a2[:, 1::2], 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = 10.0 * np.log10(odd / even)
    ratio[np.isnan(ratio)] = 0.0
    out: NDArray[np.float64] = np.minimum(np.maximum(ratio, -120.0), 120.0)
    return out
