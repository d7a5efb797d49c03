"""Level and clipping of batches of frames."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["rms_dbfs", "clipped", "CLIP_THRESHOLD"]

CLIP_THRESHOLD = 0.999
"""|x| at or above this counts as clipped (full scale is 1.0)."""


def rms_dbfs(frames: NDArray[np.float64]) -> NDArray[np.float64]:
    """RMS level of each frame in dBFS (full scale = 1.0; a full-scale sine reads -3.01 dBFS).

    Parameters
    ----------
    frames : ndarray of float, shape (n_frames, n_samples)

    Returns
    -------
    ndarray of float, shape (n_frames,), dBFS
        ``20 log10(rms)``; ``-inf`` for digital silence.

    Examples
    --------
    >>> x = np.sin(2 * np.pi * np.arange(4800) / 48)[None, :]
    >>> round(float(rms_dbfs(x)[0]), 2)
    -3.01
    """
    ms = np.sum(frames * frames, axis=1) / frames.shape[1]
    with np.errstate(divide="ignore"):
        return np.asarray(10.0 * np.log10(ms), dtype=np.float64)


def clipped(frames: NDArray[np.float64], threshold: float = CLIP_THRESHOLD) -> NDArray[np.bool_]:
    """True for each frame holding a sample with ``|x| >= threshold``.

    Examples
    --------
    >>> bool(clipped(np.array([[0.2, -0.9995]]))[0])
    True
    """
    # max |x| as max(max x, -min x): no temporary array of magnitudes
    out: NDArray[np.bool_] = np.maximum(np.maximum.reduce(frames, 1), -np.minimum.reduce(frames, 1)) >= threshold
    return out
