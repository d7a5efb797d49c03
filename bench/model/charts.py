"""Pictures of the model: a fit (measured against predicted per note and register) and a piece of
advice (every captured note before and after the proposed changes).

matplotlib's Agg backend, imported inside the functions only (see bench.workflow.chart). A
picture never replaces an existing file unless asked.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
import textwrap
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from bench.errors import SettingsError
from bench.workflow.chart import check_picture_path, use_agg_backend

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from bench.model.fit import FitResult
    from bench.model.suggest import Advice

__all__ = ["plot_advice", "plot_fit"]

_MODE_COLOURS = ("tab:blue", "tab:orange", "tab:green", "tab:red", "tab:purple", "tab:brown")


def check_new_picture(path: str | Path, overwrite: bool) -> Path:
    """The picture path (.png or .svg), or SettingsError when it exists and ``overwrite`` is off."""
    p = check_picture_path(path)
    if p.exists() and not overwrite:
        raise SettingsError(f"{p} exists; give --overwrite to replace it or choose another file name")
    return p


def _save(fig: Figure, path: Path, overwrite: bool) -> Path:
    """Save through a temporary file in the same folder, then link (or, with ``overwrite``,
    move) it into place."""
    folder = path.parent if str(path.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=path.suffix, dir=folder)
    except OSError as exc:
        raise SettingsError(f"cannot write {path}: {exc.strerror or exc}; choose a folder you can write to") from None
    os.close(fd)
    try:
        fig.savefig(tmp, dpi=110)
        if overwrite:
            os.replace(tmp, path)
        else:
            os.link(tmp, path)
            os.unlink(tmp)
    except FileExistsError:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise SettingsError(f"{path} exists; give --overwrite to replace it or choose another file name") from None
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise SettingsError(f"cannot write {path}: {exc.strerror or exc}") from None
    return path


def _two_series(
    title: str, names: Sequence[str], modes: Sequence[int], first: NDArray[np.float64], second: NDArray[np.float64],
    labels: tuple[str, str], ylabel: str, path: Path, overwrite: bool,
) -> Path:
    use_agg_backend()
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(max(7.0, 0.45 * len(names) + 2.0), 4.2))
    try:
        x = np.arange(len(names))
        ax.axhspan(-3.0, 3.0, color="0.92", zorder=0)
        ax.axhline(0.0, color="0.5", lw=0.8)
        for mode in sorted(set(modes)):
            sel = np.array([m == mode for m in modes])
            colour = _MODE_COLOURS[(mode - 1) % len(_MODE_COLOURS)]
            ax.plot(x[sel], first[sel], "o", mfc="none", color=colour, label=f"register {mode}: {labels[0]}")
            ax.plot(x[sel], second[sel], "o", color=colour, label=f"register {mode}: {labels[1]}")
            for xi, a, b in zip(x[sel], first[sel], second[sel], strict=True):
                ax.plot([xi, xi], [a, b], color=colour, lw=0.8, alpha=0.6)
        ax.set_xticks(x, list(names), rotation=60, fontsize=8)
        ax.set_ylabel(ylabel)
        ax.set_title(title, fontsize=10)
        ax.legend(fontsize=7, loc="best")
        fig.tight_layout()
        return _save(fig, path, overwrite)
    finally:
        plt.close(fig)


def plot_fit(result: FitResult, path: str | Path, title: str, overwrite: bool = False) -> Path:
    """Measured minus predicted, cents, per note and register, before the fit and after it.

    Raises
    ------
    SettingsError, BenchError
        The file exists (without ``overwrite``), a bad suffix, or it cannot be written.
    """
    p = check_new_picture(path, overwrite)
    names = [t.fingering for t in result.targets]
    modes = [t.mode for t in result.targets]
    return _two_series(f"{title}: measured against predicted (grey band +-3 c)", names, modes,
                       result.before_cents, result.after_cents, ("before the fit", "after"),
                       "measured - predicted, cents", p, overwrite)


def plot_advice(advice: Advice, path: str | Path, title: str, overwrite: bool = False) -> Path:
    """Each captured note's error against its target now and predicted after the advice.

    Raises
    ------
    SettingsError, BenchError
        The file exists (without ``overwrite``), a bad suffix, or it cannot be written.
    """
    p = check_new_picture(path, overwrite)
    names = [n.split("/")[0] for n in advice.notes]
    modes = [int(n.split("/")[1]) for n in advice.notes]
    cuts = ", ".join(f"{c.label} {c.kind} {c.from_mm:.2f}->{c.to_mm:.2f} mm" for c in advice.cuts) or "no change"
    wrapped = "\n".join(textwrap.wrap(cuts, 110))
    return _two_series(f"{title}: before and after the advice\n{wrapped}", names, modes, advice.before_cents,
                       advice.after_cents, ("now", "after"), "cents from target", p, overwrite)
