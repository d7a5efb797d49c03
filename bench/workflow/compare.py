"""Before and after: what an adjustment changed, note by note and register by register.

For each (note, register) captured in both sessions, using the latest capture of each:

* ``delta_cents``: change of the temperature-corrected pitch,
  ``1200 * log2((t_a * 2**(c_a/1200)) / (t_b * 2**(c_b/1200)))`` with ``t`` the target (Hz) and
  ``c`` the corrected cents of each session. With the same temperament and pitch standard the
  targets are equal and this is just ``c_a - c_b``; when they differ it still measures how the
  instrument moved, not how the targets did.
* noise: ``noise_cents = k * sqrt(s_b**2 + s_a**2)`` with ``s`` each capture's spread (scaled
  MAD of the frames, cents) and ``k = 2``; a note *moved* when ``|delta_cents|`` exceeds both
  the noise and ``min_cents`` (1 c). Frame spread is larger than the uncertainty of a median,
  so this errs on the side of not calling noise a change.
* also the change of spread (cents), of level (dB), of odd/even balance and of each harmonic
  H1..H8 (dB re the strongest).

Both sessions may have been played at different air temperatures; corrected cents (to each
session's reference temperature) are compared, and the text says so. A different reference
temperature, temperament or pitch standard is reported as a warning line.
"""

from __future__ import annotations

import csv
import math
import textwrap
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bench.errors import BenchError, LogError
from bench.framelog import number_cell, safe_cell
from bench.reading import SettingsKey
from bench.workflow.captures import Capture
from bench.workflow.chart import (
    GUIDE_CENTS,
    build_chart,
    check_picture_path,
    use_agg_backend,
)
from bench.workflow.profiles import InstrumentProfile

__all__ = [
    "COMPARISON_COLUMNS",
    "Comparison",
    "NoteChange",
    "compare_captures",
    "format_comparison",
    "plot_comparison",
    "write_comparison_csv",
]

ChangeStatus = Literal["both", "before only", "after only"]

COMPARISON_COLUMNS: tuple[str, ...] = (
    "note", "midi", "register", "status", "cents_before", "cents_after", "delta_cents",
    "noise_cents", "moved", "spread_before", "spread_after", "delta_spread_cents",
    "delta_level_db", "delta_odd_even_db",
    "delta_h1_db", "delta_h2_db", "delta_h3_db", "delta_h4_db",
    "delta_h5_db", "delta_h6_db", "delta_h7_db", "delta_h8_db",
)  # fmt: skip
"""Columns of the comparison CSV (status: both | before only | after only; moved: 1 | 0)."""


def _diff(a: float | None, b: float | None) -> float | None:
    if a is None or b is None or not (math.isfinite(a) and math.isfinite(b)):
        return None
    return a - b


@dataclass(frozen=True, slots=True)
class NoteChange:
    """The change of one (note, register) between two sessions (units in the names)."""

    midi: int
    note: str
    register: int
    before: Capture | None
    after: Capture | None
    delta_cents: float | None
    noise_cents: float | None
    moved: bool
    delta_spread_cents: float | None
    delta_level_db: float | None
    delta_odd_even_db: float | None
    delta_harmonics_db: tuple[float | None, ...]

    @property
    def status(self) -> ChangeStatus:
        if self.before is not None and self.after is not None:
            return "both"
        return "before only" if self.before is not None else "after only"


@dataclass(frozen=True, slots=True)
class Comparison:
    """Before/after comparison of two sets of captures.

    Attributes
    ----------
    before_name, after_name : str
        What the two sides are called in the output (file names or labels).
    profile : InstrumentProfile
    changes : tuple of NoteChange
        Rising by note, then register.
    before_settings, after_settings : tuple of SettingsKey
    warnings : tuple of str
        Differences in settings that matter when reading the result.
    k : float
    min_cents : float, cents
    """

    before_name: str
    after_name: str
    profile: InstrumentProfile
    changes: tuple[NoteChange, ...]
    before_settings: tuple[SettingsKey, ...]
    after_settings: tuple[SettingsKey, ...]
    warnings: tuple[str, ...]
    k: float
    min_cents: float

    def moved(self) -> list[NoteChange]:
        """Changes larger than the measurement noise."""
        return [c for c in self.changes if c.moved]

    def both(self) -> list[NoteChange]:
        """Notes captured in both sessions."""
        return [c for c in self.changes if c.status == "both"]


def _corrected_delta(b: Capture, a: Capture) -> float:
    if b.target_hz > 0 and a.target_hz > 0:
        return a.cents - b.cents + 1200.0 * math.log2(a.target_hz / b.target_hz)
    return a.cents - b.cents


def _fmt_temps(settings: tuple[SettingsKey, ...]) -> str:
    if not settings:
        return "no captures"
    temps = sorted({s.temp_c for s in settings})
    refs = sorted({s.ref_temp_c for s in settings})
    t = "/".join(f"{x:.1f}" for x in temps)
    r = "/".join(f"{x:.1f}" for x in refs)
    return f"played at {t} °C, corrected to {r} °C"


def compare_captures(
    before: Iterable[Capture],
    after: Iterable[Capture],
    profile: InstrumentProfile,
    *,
    before_name: str = "before",
    after_name: str = "after",
    before_label: str | None = None,
    after_label: str | None = None,
    k: float = 2.0,
    min_cents: float = 1.0,
) -> Comparison:
    """Compare the latest captures of two sessions, note by note (method: module docstring).

    Parameters
    ----------
    before, after : iterable of Capture
    profile : InstrumentProfile
        Gives each capture's register.
    before_name, after_name : str
        Names used in the output.
    before_label, after_label : str or None
        Use only captures with this session label (two passes within one session log).
    k : float > 0
        Noise multiplier.
    min_cents : float >= 0, cents
        Smallest change ever called a move.

    Raises
    ------
    BenchError
        ``k`` or ``min_cents`` out of range.
    """
    if not k > 0 or not min_cents >= 0:
        raise BenchError(f"noise factor {k} must be > 0 and min change {min_cents} c >= 0")
    cb = build_chart(before, profile, label=before_label)
    ca = build_chart(after, profile, label=after_label)
    keys = sorted(
        {(e.midi, e.register) for e in cb.checked()} | {(e.midi, e.register) for e in ca.checked()}
    )
    changes = []
    for midi, reg in keys:
        eb, ea = cb.entry(midi, reg), ca.entry(midi, reg)
        b = eb.capture if eb else None
        a = ea.capture if ea else None
        if b is not None and a is not None and not b.jump and not a.jump:
            delta: float | None = _corrected_delta(b, a)
            noise: float | None = k * math.hypot(b.cents_spread, a.cents_spread)
            assert delta is not None and noise is not None
            moved = abs(delta) > max(noise, min_cents)
            harm = tuple(_diff(x, y) for x, y in zip(a.harmonics_db, b.harmonics_db, strict=True))
        else:
            delta = noise = None
            moved = False
            harm = (None,) * 8
        ref = a if a is not None else b
        assert ref is not None
        changes.append(
            NoteChange(
                midi=midi,
                note=ref.note,
                register=reg,
                before=b,
                after=a,
                delta_cents=delta,
                noise_cents=noise,
                moved=moved,
                delta_spread_cents=_diff(a.cents_spread, b.cents_spread) if delta is not None and a and b else None,
                delta_level_db=_diff(a.level_dbfs, b.level_dbfs) if delta is not None and a and b else None,
                delta_odd_even_db=_diff(a.odd_even_db, b.odd_even_db) if delta is not None and a and b else None,
                delta_harmonics_db=harm,
            )
        )
    warnings = []
    refs_b = {s.ref_temp_c for s in cb.settings}
    refs_a = {s.ref_temp_c for s in ca.settings}
    if refs_b and refs_a and refs_b != refs_a:
        warnings.append(
            "the sessions were corrected to different reference temperatures "
            f"({'/'.join(f'{x:.1f}' for x in sorted(refs_b))} vs "
            f"{'/'.join(f'{x:.1f}' for x in sorted(refs_a))} °C); redo one with the same --ref-temp"
        )
    tb = {(s.temperament, s.tonic, s.a4_hz) for s in cb.settings}
    ta = {(s.temperament, s.tonic, s.a4_hz) for s in ca.settings}
    if tb and ta and tb != ta:
        warnings.append(
            "temperament, tonic or pitch standard differ between the sessions; changes are of "
            "the corrected pitch itself, not against each session's target"
        )
    return Comparison(
        before_name=before_name,
        after_name=after_name,
        profile=profile,
        changes=tuple(changes),
        before_settings=cb.settings,
        after_settings=ca.settings,
        warnings=tuple(warnings),
        k=k,
        min_cents=min_cents,
    )


def _f(v: float | None, spec: str, width: int) -> str:
    if v is None or not math.isfinite(v):
        return "-".rjust(width)
    text = f"{v:{spec}}"
    if text.lstrip("+-").strip("0.") == "":  # no "-0.0"
        text = f"{0.0:{spec}}"
    return text.rjust(width)


def format_comparison(cmp: Comparison) -> str:
    """The comparison as a plain-text table; moved notes are marked ``MOVED``."""
    lines = [
        f"Before: {cmp.before_name} ({_fmt_temps(cmp.before_settings)})",
        f"After:  {cmp.after_name} ({_fmt_temps(cmp.after_settings)})",
        (
            "Compared on temperature-corrected cents; moved = |change| > "
            f"{cmp.k:g} x sqrt(spread_before^2 + spread_after^2) and > {cmp.min_cents:g} c."
        ),
    ]
    lines += [f"warning: {w}" for w in cmp.warnings]
    lines.append(
        f"{'note':<5} {'reg':>3} {'before':>7} {'after':>7} {'change':>7} {'noise':>6} "
        f"{'d.spread':>8} {'d.level':>7} {'d.odd/even':>10} {'d.H2':>6}"
    )
    for c in cmp.changes:
        cb = c.before.cents if c.before else None
        ca = c.after.cents if c.after else None
        mark = "  MOVED" if c.moved else ("" if c.status == "both" else f"  ({c.status})")
        broke = [f"{side} broke ({cap.jump})" for side, cap in (("before", c.before), ("after", c.after))
                 if cap is not None and cap.jump]
        if broke:
            mark += "  " + ", ".join(broke) + ": not compared"
        text_b = "broke".rjust(7) if c.before is not None and c.before.jump else _f(cb, '+.1f', 7)
        text_a = "broke".rjust(7) if c.after is not None and c.after.jump else _f(ca, '+.1f', 7)
        lines.append(
            f"{c.note:<5} {c.register:>3} {text_b} {text_a} "
            f"{_f(c.delta_cents, '+.1f', 7)} {_f(c.noise_cents, '.1f', 6)} "
            f"{_f(c.delta_spread_cents, '+.1f', 8)} {_f(c.delta_level_db, '+.1f', 7)} "
            f"{_f(c.delta_odd_even_db, '+.1f', 10)} {_f(c.delta_harmonics_db[1], '+.1f', 6)}{mark}"
        )
    moved = cmp.moved()
    both = cmp.both()
    lines.append(
        f"{len(both)} notes in both sessions; {len(moved)} moved"
        + (": " + ", ".join(f"{c.note} R{c.register} {c.delta_cents:+.1f} c" for c in moved) if moved else "")
    )
    return "\n".join(lines) + "\n"


def write_comparison_csv(cmp: Comparison, path: str | Path) -> Path:
    """Write the comparison (columns :data:`COMPARISON_COLUMNS`). Raises LogError."""
    path = Path(path)

    def n(v: float | None) -> str:
        return number_cell(v, 2)

    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "w", encoding="utf-8", newline="") as f:
            w = csv.writer(f)
            w.writerow(COMPARISON_COLUMNS)
            for c in cmp.changes:
                w.writerow(
                    [
                        safe_cell(c.note), c.midi, c.register, c.status,
                        # a capture that broke into another register is no measurement of the note
                        n(c.before.cents if c.before and not c.before.jump else None),
                        n(c.after.cents if c.after and not c.after.jump else None),
                        n(c.delta_cents), n(c.noise_cents), "1" if c.moved else "0",
                        n(c.before.cents_spread if c.before else None),
                        n(c.after.cents_spread if c.after else None),
                        n(c.delta_spread_cents), n(c.delta_level_db), n(c.delta_odd_even_db),
                        *(n(h) for h in c.delta_harmonics_db),
                    ]
                )  # fmt: skip
    except OSError as exc:
        raise LogError(f"cannot write the comparison {path}: {exc.strerror or exc}") from None
    return path


def plot_comparison(cmp: Comparison, path: str | Path, *, title: str | None = None) -> Path:
    """Save the comparison as PNG or SVG: change in cents per note (bars), the noise band of
    each note as error bars, moved notes filled, the ±5 c guide shaded; below it the change of
    odd/even balance (dB)."""
    path = check_picture_path(path)
    use_agg_backend()
    import matplotlib.pyplot as plt

    both = cmp.both()
    width = max(7.0, 0.32 * len(both) + 2.0)
    fig, (ax, ax2) = plt.subplots(2, 1, figsize=(width, 6.5), sharex=True,
                                  gridspec_kw={"height_ratios": [3, 1.3]})
    try:
        xs = list(range(len(both)))
        deltas = [c.delta_cents or 0.0 for c in both]
        noise = [max(c.noise_cents or 0.0, cmp.min_cents) for c in both]
        colours = ["#c0392b" if c.moved else "#4f7ea8" for c in both]
        ax.axhspan(-GUIDE_CENTS, GUIDE_CENTS, color="#f0f0f0", zorder=0, label=f"±{GUIDE_CENTS:g} c guide")
        ax.bar(xs, [2 * n for n in noise], bottom=[-n for n in noise], width=0.8, color="#d9d9d9",
               edgecolor="#b0b0b0", linewidth=0.5, zorder=1, label="noise band of the note")
        ax.axhline(0.0, color="#555555", linewidth=0.8, zorder=2)
        ax.bar(xs, deltas, width=0.45, color=colours, edgecolor="#333333", linewidth=0.5, zorder=3,
               label="change (red: moved beyond noise)")
        for x, c in zip(xs, both, strict=True):
            if c.delta_cents is None:  # one side broke into another register
                ax.annotate("broke", (x, 0.0), ha="center", va="bottom", fontsize=7, color="#c62828",
                            rotation=90)
            if c.moved:
                ax.annotate(f"{c.delta_cents:+.1f}", (x, c.delta_cents or 0.0), ha="center",
                            va="bottom" if (c.delta_cents or 0) >= 0 else "top", fontsize=8)
        lim = max([8.0] + [abs(d) * 1.25 for d in deltas] + [n * 1.2 for n in noise])
        ax.set_ylim(-lim, lim)
        ax.set_xlim(-0.7, len(xs) - 0.3)
        ax.set_ylabel("change, cents (corrected)")
        ax.legend(loc="upper left", fontsize=8, ncol=3, frameon=False)
        moved_names = ", ".join(f"{c.note} R{c.register}" for c in cmp.moved()) or "nothing"
        head = title or f"{cmp.after_name} against {cmp.before_name}"
        sub = (f"moved beyond noise: {moved_names}; before {_fmt_temps(cmp.before_settings)}, "
               f"after {_fmt_temps(cmp.after_settings)}")
        chars = max(40, int(width * 14))
        ax.set_title("\n".join(textwrap.wrap(head, chars) + textwrap.wrap(sub, chars)), fontsize=9)
        ax.grid(axis="y", color="#dddddd", linewidth=0.5)
        oe = [c.delta_odd_even_db if c.delta_odd_even_db is not None else 0.0 for c in both]
        ax2.axhline(0.0, color="#555555", linewidth=0.8)
        ax2.bar(xs, oe, color="#7a9a5a", edgecolor="#333333", linewidth=0.5)
        ax2.set_ylabel("change of\nodd/even, dB", fontsize=8)
        ax2.set_xticks(xs)
        many = len(both) > 14
        ax2.set_xticklabels([f"{c.note}{' ' if many else chr(10)}R{c.register}" for c in both], fontsize=7,
                            rotation=90 if many else 0)
        oe_lim = max([1.0] + [abs(v) * 1.25 for v in oe])
        ax2.set_ylim(-oe_lim, oe_lim)
        ax2.grid(axis="y", color="#dddddd", linewidth=0.5)
        fig.tight_layout()
        path.parent.mkdir(parents=True, exist_ok=True)
        fig.savefig(path, dpi=110, bbox_inches="tight", pad_inches=0.15)  # nothing clipped
    except OSError as exc:
        raise BenchError(f"cannot write the picture {path}: {exc.strerror or exc}") from None
    finally:
        plt.close(fig)
    return path
