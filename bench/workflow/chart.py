"""The tuning chart: per note of the compass and per register, the latest capture against its
target, and the notes still unchecked.

Three outputs of one :class:`TuningChart`: a plain-text chart (:func:`format_text_chart`), a
summary CSV (:func:`write_summary_csv`) and a picture (:func:`plot_chart`, PNG or SVG through
matplotlib's Agg backend; matplotlib is imported only inside the picture functions).

Which capture counts: the latest (highest index) capture of each (note, register) that did not
break; a capture that broke counts only while the note has no other. A capture
describes the fingered note, and its register is the one the chart's profile gives that note.
A capture of a note that *broke* into another register (overblown or vented while the
fingering was held) is shown as broken, with its jump kind and the mode it sounded: never as a
checked capture (of the fingered note or of the note it jumped to). Captures of notes outside
the profile's compass are shown as extra entries. One spelling per chart: sharps, or flats
when asked.

Cents are the corrected values: measured against the session's temperament, tonic and pitch
standard, and corrected for air temperature to the reference temperature (see
``bench.tuning``).
"""

from __future__ import annotations

import csv
import math
import textwrap
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

from bench.errors import BenchError, LogError
from bench.framelog import number_cell, safe_cell
from bench.reading import SettingsKey
from bench.tuning.notes import note_name
from bench.workflow.captures import Capture
from bench.workflow.profiles import InstrumentProfile

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from bench.workflow.blowing import BlowingCurve

__all__ = [
    "GUIDE_CENTS",
    "ChartEntry",
    "TuningChart",
    "build_chart",
    "capture_register",
    "chart_figure",
    "describe_settings",
    "format_text_chart",
    "plot_chart",
    "write_summary_csv",
]

GUIDE_CENTS = 5.0
"""Half-width of the guide band drawn on charts, cents (builders' usual aim for principal
notes, REFERENCES §5 · from memory; also about one pitch JND, common practice)."""

EntryStatus = Literal["checked", "unchecked", "extra", "broken"]

SUMMARY_COLUMNS: tuple[str, ...] = (
    "note", "written_note", "midi", "register", "status", "cents", "cents_spread", "cents_raw",
    "level_dbfs", "odd_even_db", "register_margin_db", "capture_index", "label",
    "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c", "jump",
)  # fmt: skip
"""Columns of the summary CSV (status: checked | unchecked | extra | broken; jump: empty,
overblown or vented -- set on a broken entry, whose cents are those of the steady part before
the break, if any)."""


@dataclass(frozen=True, slots=True)
class ChartEntry:
    """One (note, register) cell of the chart.

    Attributes
    ----------
    midi : int
    note : str
        Sounding note name.
    written : str
        Written note name (the profile's display transposition).
    register : int
    expected : bool
        The profile has this note in this register.
    capture : Capture or None
        Latest capture; None when unchecked.
    """

    midi: int
    note: str
    written: str
    register: int
    expected: bool
    capture: Capture | None

    @property
    def status(self) -> EntryStatus:
        """checked, unchecked, extra (captured but not in the profile's plan), or broken (the
        latest capture broke into another register: not a measurement of the note)."""
        if self.capture is None:
            return "unchecked"
        if self.capture.jump:
            return "broken"
        return "checked" if self.expected else "extra"


@dataclass(frozen=True, slots=True)
class TuningChart:
    """A tuning chart of one session (or one labelled pass of it).

    Attributes
    ----------
    profile : InstrumentProfile
    entries : tuple of ChartEntry
        Rising by note, then register.
    settings : tuple of SettingsKey
        Distinct settings the used captures were taken under, in order of first use.
    labels : tuple of str
        Distinct session labels of the used captures.
    """

    profile: InstrumentProfile
    entries: tuple[ChartEntry, ...]
    settings: tuple[SettingsKey, ...]
    labels: tuple[str, ...]

    def unchecked(self) -> list[ChartEntry]:
        """Expected entries without a capture."""
        return [e for e in self.entries if e.capture is None]

    def broken(self) -> list[ChartEntry]:
        """Entries whose latest capture broke into another register."""
        return [e for e in self.entries if e.status == "broken"]

    def checked(self) -> list[ChartEntry]:
        """Entries with a capture (expected or extra)."""
        return [e for e in self.entries if e.capture is not None]

    def entry(self, midi: int, register: int) -> ChartEntry | None:
        """The entry of a note and register, or None."""
        for e in self.entries:
            if e.midi == midi and e.register == register:
                return e
        return None


def capture_register(cap: Capture, profile: InstrumentProfile) -> int:
    """Register of a capture on a chart of ``profile``: the register the profile gives the
    fingered note (a note that broke stays in its own register, marked broken)."""
    return profile.register_of(cap.midi)


def build_chart(
    captures: Iterable[Capture],
    profile: InstrumentProfile,
    *,
    label: str | None = None,
    flats: bool = False,
) -> TuningChart:
    """The chart of ``captures`` on ``profile``.

    Parameters
    ----------
    captures : iterable of Capture
    profile : InstrumentProfile
    label : str or None
        Use only captures with this session label (one pass of a session).
    flats : bool
        Spell every note of the chart with flats (default: sharps, as profiles are written),
        whatever each capture was spelt with: one spelling per chart.

    Examples
    --------
    >>> from bench.workflow.profiles import get_profile
    >>> chart = build_chart([], get_profile("alto"))
    >>> len(chart.entries), len(chart.unchecked())
    (27, 27)
    """
    latest: dict[tuple[int, int], Capture] = {}
    for one in sorted(captures, key=lambda c: c.index):
        if label is not None and one.label != label:
            continue
        key = (one.midi, capture_register(one, profile))
        if one.jump and key in latest and not latest[key].jump:
            continue  # a note that broke (a crescendo to its break) keeps its clean capture
        latest[key] = one
    keys = set(profile.expected())
    keys.update(latest)
    entries = []
    for midi, reg in sorted(keys):
        cap = latest.get((midi, reg))
        name = note_name(midi, flats=flats)
        entries.append(
            ChartEntry(
                midi=midi,
                note=name,
                written=profile.written_name(midi, flats=flats),
                register=reg,
                expected=(midi, reg) in set(profile.expected()),
                capture=cap,
            )
        )
    used = [latest[k] for k in sorted(latest, key=lambda k: latest[k].index)]
    settings: list[SettingsKey] = []
    labels: list[str] = []
    for cap in used:
        if cap.settings not in settings:
            settings.append(cap.settings)
        if cap.label not in labels:
            labels.append(cap.label)
    return TuningChart(profile, tuple(entries), tuple(settings), tuple(labels))


def describe_settings(settings: SettingsKey) -> str:
    """One phrase: temperament, tonic, pitch standard and temperatures.

    >>> describe_settings(SettingsKey("equal", "C", 440.0, 23.5, 20.0))
    'equal on C, A4 = 440.0 Hz, played at 23.5 °C, corrected to 20.0 °C'
    """
    rh = f", {settings.rh_percent:.0f} % RH" if settings.rh_percent is not None else ""
    return (
        f"{settings.temperament} on {settings.tonic}, A4 = {settings.a4_hz:.1f} Hz, "
        f"played at {settings.temp_c:.1f} °C, corrected to {settings.ref_temp_c:.1f} °C{rh}"
    )


def _bar(cents: float, spread: float, half_width: int = 25) -> str:
    """A horizontal gauge from -half_width to +half_width cents, one character per cent."""
    cells = ["·"] * (2 * half_width + 1)
    lo, hi = half_width - int(GUIDE_CENTS), half_width + int(GUIDE_CENTS)
    for i in range(lo, hi + 1):
        cells[i] = " "
    cells[lo - 1] = "["
    cells[hi + 1] = "]"
    cells[half_width] = "|"
    if spread > 0:
        a = max(0, round(half_width + cents - spread))
        b = min(2 * half_width, round(half_width + cents + spread))
        for i in range(a, b + 1):
            cells[i] = "-"
    pos = round(half_width + cents)
    if pos < 0:
        cells[0] = "<"
    elif pos > 2 * half_width:
        cells[-1] = ">"
    else:
        cells[pos] = "o"
    return "".join(cells)


def format_text_chart(chart: TuningChart, *, half_width_cents: int = 25) -> str:
    """The chart as plain text, one line per entry.

    The gauge spans ±``half_width_cents`` at one character per cent: ``o`` the median, ``-``
    ± the spread, ``[ ]`` the ±5 c guide, ``|`` the target; ``<``/``>`` off the scale.
    """
    p = chart.profile
    lines = [f"Tuning chart: {p.title} ({p.name}), {note_name(p.lowest_midi)}-{note_name(p.highest_midi)}"]
    for s in chart.settings:
        lines.append(f"  cents against {describe_settings(s)}")
    if len(chart.settings) > 1:
        lines.append("  note: captures were taken under different settings; compare with care")
    if any(lab for lab in chart.labels):
        lines.append("  session: " + "; ".join(lab or "(no label)" for lab in chart.labels))
    transposed = p.written_offset_semitones != 0
    head = f"{'note':<5} {'writ':<5} " if transposed else f"{'note':<5} "
    scale = f"-{half_width_cents}".ljust(half_width_cents) + "0" + f"+{half_width_cents}".rjust(half_width_cents)
    lines.append(f"{head}{'reg':>3} {'cents':>7} {'spread':>6} {'margin':>7}  {scale}")
    current_reg = None
    for e in chart.entries:
        if e.expected and e.register != current_reg:
            current_reg = e.register
        name = f"{e.note:<5} {e.written:<5} " if transposed else f"{e.note:<5} "
        if e.capture is None:
            lines.append(f"{name}{e.register:>3} {'-':>7} {'-':>6} {'-':>7}  not yet checked")
            continue
        c = e.capture
        margin = f"{round(c.register_margin_db, 1) + 0.0:+.1f}dB" if c.register_margin_db is not None else "-"
        if c.jump:
            mode = f" into mode {c.mode}" if c.mode is not None else ""
            before = f"; {c.cents:+.1f} c before the break" if math.isfinite(c.cents) else ""
            lines.append(
                f"{name}{e.register:>3} {'broke':>7} {'-':>6} {margin:>7}  "
                f"BROKE ({c.jump}{mode}){before}: not checked, play it again"
            )
            continue
        extra = "  (not in this profile's plan)" if not e.expected else ""
        cents = c.cents if abs(c.cents) >= 0.05 else 0.0  # no "-0.0"
        lines.append(
            f"{name}{e.register:>3} {cents:>+7.1f} {c.cents_spread:>6.1f} {margin:>7}  "
            f"{_bar(c.cents, c.cents_spread, half_width_cents)}{extra}"
        )
    n_checked = sum(1 for e in chart.entries if e.status == "checked")
    n_expected = sum(1 for e in chart.entries if e.expected)
    n_extra = sum(1 for e in chart.entries if e.status == "extra")
    far = [e for e in chart.entries if e.status in ("checked", "extra")
           and e.capture is not None and abs(e.capture.cents) > GUIDE_CENTS]
    broken = chart.broken()
    lines.append(
        f"{n_checked} of {n_expected} notes checked"
        + (f" (and {n_extra} outside the profile's plan)" if n_extra else "")
        + "; "
        f"{len(far)} outside ±{GUIDE_CENTS:g} c"
        + (": " + ", ".join(f"{e.note} R{e.register}" for e in far) if far else "")
        + (f"; {len(broken)} broke: " + ", ".join(f"{e.note} R{e.register}" for e in broken) if broken else "")
    )
    return "\n".join(lines) + "\n"


def write_summary_csv(chart: TuningChart, path: str | Path) -> Path:
    """Write the chart as CSV (columns :data:`SUMMARY_COLUMNS`), one row per entry.

    Raises
    ------
    LogError
        The file cannot be written.
    """
    path = Path(path)

    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "w", encoding="utf-8", newline="") as f:
            w = csv.writer(f)
            w.writerow(SUMMARY_COLUMNS)
            for e in chart.entries:
                c = e.capture
                s = c.settings if c is not None else None
                w.writerow(
                    [
                        safe_cell(e.note),
                        safe_cell(e.written),
                        e.midi,
                        e.register,
                        e.status,
                        number_cell(c.cents if c else None, 2),
                        number_cell(c.cents_spread if c else None, 2),
                        number_cell(c.cents_raw if c else None, 2),
                        number_cell(c.level_dbfs if c else None, 1),
                        number_cell(c.odd_even_db if c else None, 1),
                        number_cell(c.register_margin_db if c else None, 1),
                        c.index if c else "",
                        safe_cell(c.label) if c else "",
                        safe_cell(s.temperament) if s else "",
                        safe_cell(s.tonic) if s else "",
                        number_cell(s.a4_hz if s else None, 2),
                        number_cell(s.temp_c if s else None, 2),
                        number_cell(s.ref_temp_c if s else None, 2),
                        c.jump if c else "",
                    ]
                )
    except OSError as exc:
        raise LogError(f"cannot write the summary {path}: {exc.strerror or exc}") from None
    return path


# --- pictures -----------------------------------------------------------------------------

_REGISTER_STYLE = {1: ("o", "#1f5f8b"), 2: ("s", "#b5651d"), 3: ("^", "#2e7d32")}
_OTHER_STYLE = ("D", "#6a1b9a")


def use_agg_backend() -> None:
    """Draw with matplotlib's Agg backend (matplotlib is imported here and by the plotting
    functions only, never at package import)."""
    import matplotlib

    matplotlib.use("Agg", force=True)


def check_picture_path(path: str | Path) -> Path:
    """The picture path, or BenchError when its suffix is not .png or .svg."""
    p = Path(path)
    if p.suffix.lower() not in (".png", ".svg"):
        raise BenchError(f"picture {p} has suffix {p.suffix or '(none)'!r}; use .png or .svg")
    return p


def draw_chart_axes(ax: Axes, chart: TuningChart) -> None:
    """Draw the chart on a matplotlib Axes (for the picture and for embedding).

    Measured notes are drawn on the cents scale; notes not yet checked (grey x) and notes
    whose capture broke into another register (red triangle) are marked in a strip above the
    plot, off the cents scale, so that they never read as measurements. The legend and the
    note on margins sit below the plot, clear of the markers.
    """
    from matplotlib.transforms import blended_transform_factory

    midis = sorted({e.midi for e in chart.entries})
    xpos = {m: i for i, m in enumerate(midis)}
    ax.axhspan(-GUIDE_CENTS, GUIDE_CENTS, color="#e6e6e6", zorder=0, label=f"±{GUIDE_CENTS:g} c guide")
    ax.axhline(0.0, color="#555555", linewidth=0.8, zorder=1)
    regs = sorted({e.register for e in chart.entries})
    n = len(regs)
    ymax = 15.0
    any_margin = False
    for k, reg in enumerate(regs):
        marker, colour = _REGISTER_STYLE.get(reg, _OTHER_STYLE)
        dx = (k - (n - 1) / 2) * 0.12  # keep registers sharing a note apart
        for planned in (True, False):
            es = [(e, c) for e in chart.entries
                  if e.register == reg and (c := e.capture) is not None and e.expected == planned
                  and e.status != "broken"]
            if not es:
                continue
            xs = [xpos[e.midi] + dx for e, _ in es]
            ys = [c.cents for _, c in es]
            err = [c.cents_spread for _, c in es]
            label = f"register {reg}" if planned else f"register {reg}, outside the profile's plan"
            ax.errorbar(xs, ys, yerr=err, fmt=marker, color=colour, ecolor=colour, elinewidth=1.2,
                        capsize=3, markersize=6, linestyle="none", label=label, zorder=3,
                        markerfacecolor=colour if planned else "white")
            ymax = max(ymax, *(abs(y) + e for y, e in zip(ys, err, strict=True)))
            for x, y, e, (_, cap) in zip(xs, ys, err, es, strict=True):
                margin = cap.register_margin_db
                if margin is not None:
                    any_margin = True
                    ax.annotate(f"{round(margin, 1) + 0.0:+.1f} dB", (x, y + e), xytext=(0, 4),
                                textcoords="offset points", ha="center", fontsize=6, color="#666666")
    strip = blended_transform_factory(ax.transData, ax.transAxes)
    unchecked = chart.unchecked()
    if unchecked:
        ax.plot([xpos[e.midi] for e in unchecked], [1.035] * len(unchecked), "x", color="#888888",
                markersize=6, transform=strip, linestyle="none", clip_on=False,
                label="not yet checked (strip above the plot)", zorder=2)
    broken = chart.broken()
    if broken:
        ax.plot([xpos[e.midi] for e in broken], [1.035] * len(broken), "v", color="#c62828",
                markersize=6, transform=strip, linestyle="none", clip_on=False,
                label="broke into another register: not checked", zorder=2)
    if any_margin:
        ax.plot([], [], " ", label="grey dB: level left before the note broke into the next register")
    # register boundaries of the profile, each register labelled
    starts = list(chart.profile.register_starts)
    for i, start in enumerate(starts):
        x0 = xpos.get(start)
        if x0 is None:
            later = [m for m in midis if m >= start]
            if not later:
                continue
            x0 = xpos[later[0]]
        if i > 0:
            ax.axvline(x0 - 0.5, color="#999999", linestyle=":", linewidth=0.8)
        ax.text(x0 - 0.45, 0.97, f"R{i + 1}", transform=strip, ha="left", va="top", fontsize=8,
                color="#555555", fontweight="bold")
    ylim = math.ceil((ymax * 1.15) / 5.0) * 5.0
    ax.set_ylim(-ylim, ylim)
    ax.set_xlim(-0.7, len(midis) - 0.3)
    ax.set_xticks(range(len(midis)))
    names = {e.midi: e.note for e in chart.entries}
    ax.set_xticklabels([names[m] for m in midis], rotation=90 if len(midis) > 14 else 0, fontsize=8)
    ax.set_ylabel("cents (corrected)")
    off = chart.profile.written_offset_semitones
    if off:
        way = "lower" if off > 0 else "higher"
        what = "an octave" if abs(off) == 12 else f"{abs(off)} semitones"
        ax.set_xlabel(f"sounding note (written {what} {way}, {chart.profile.clef} clef)", fontsize=8)
    else:
        ax.set_xlabel("note (sounding = written)", fontsize=8)
    ax.grid(axis="y", color="#dddddd", linewidth=0.5)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.22), fontsize=8, ncol=2, frameon=False)


def draw_blowing_axes(ax: Axes, curves: Sequence[BlowingCurve]) -> None:
    """Draw blowing curves (cents against level, fit, break level) on a matplotlib Axes."""
    colours = ["#1f5f8b", "#b5651d", "#2e7d32", "#6a1b9a", "#c62828"]
    for i, c in enumerate(curves):
        colour = colours[i % len(colours)]
        ax.plot(c.levels_dbfs, c.cents, ".", color=colour, markersize=3, alpha=0.35)
        if c.slope_cents_per_db is not None:
            xs = [c.level_min_dbfs, c.level_max_dbfs]
            ys = [math.nan if y is None else y for y in map(c.cents_at, xs)]  # None: no fit, drawn as a gap
            ax.plot(xs, ys, "-", color="#222222", linewidth=0.9,
                    label=f"{c.note}: {c.slope_cents_per_db:+.3f} ± {c.slope_se_cents_per_db or 0:.3f} c/dB")
        if c.break_level_dbfs is not None:
            ax.axvline(c.break_level_dbfs, color=colour, linestyle="--", linewidth=1.0,
                       label=f"{c.note} broke at {c.break_level_dbfs:.1f} dBFS")
    ax.axhspan(-GUIDE_CENTS, GUIDE_CENTS, color="#e6e6e6", zorder=0)
    ax.set_xlabel("level (dBFS)")
    ax.set_ylabel("cents (corrected)")
    ax.set_title("blowing curve: " + ", ".join(c.note for c in curves), fontsize=10)
    ax.grid(color="#dddddd", linewidth=0.5)
    ax.legend(loc="upper left", fontsize=8, frameon=False)


def chart_figure(
    chart: TuningChart,
    *,
    blowing: Sequence[BlowingCurve] = (),
    title: str | None = None,
) -> Figure:
    """The chart's matplotlib figure (Agg), laid out; the caller closes it
    (``matplotlib.pyplot.close``). See :func:`plot_chart`."""
    use_agg_backend()
    import matplotlib.pyplot as plt

    n_notes = len({e.midi for e in chart.entries})
    width = max(7.0, 0.32 * n_notes + 2.0)
    rows = 2 if blowing else 1
    fig, axes = plt.subplots(rows, 1, figsize=(width, 4.2 * rows), squeeze=False)
    draw_chart_axes(axes[0][0], chart)
    p = chart.profile
    head = title or f"{p.title}: tuning per note and register"
    sub = "; ".join(describe_settings(s) for s in chart.settings[:2])
    if chart.labels and any(chart.labels):
        sub = " / ".join(lab for lab in chart.labels if lab) + (" | " + sub if sub else "")
    chars = max(40, int(width * 11))  # about 13 characters of 10 pt type per inch, less a margin
    wrapped = "\n".join(textwrap.wrap(head, chars) + textwrap.wrap(sub, chars))
    axes[0][0].set_title(wrapped, fontsize=10, pad=16)  # room for the strip of marks
    if blowing:
        draw_blowing_axes(axes[1][0], blowing)
    fig.tight_layout()
    return fig


def plot_chart(
    chart: TuningChart,
    path: str | Path,
    *,
    blowing: Sequence[BlowingCurve] = (),
    title: str | None = None,
) -> Path:
    """Save the chart as PNG or SVG (by the suffix of ``path``; an SVG keeps its text as text).

    One series per register (markers and error bars = spread; open markers for notes outside
    the profile's plan; small grey "+N dB" above a note: its register margin), grey ±5 c
    guide band, grey crosses (unchecked) and red triangles (broke) in a strip above the plot,
    off the cents scale, dotted lines at register boundaries labelled R1, R2 ..., the title
    wrapped to the figure's width. With
    ``blowing`` curves a second panel shows cents against level with the fit and the break.

    Raises
    ------
    BenchError
        Bad suffix or unwritable file.
    """
    path = check_picture_path(path)
    use_agg_backend()
    import matplotlib.pyplot as plt

    with plt.rc_context({"svg.fonttype": "none"}):
        fig = chart_figure(chart, blowing=blowing, title=title)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            fig.savefig(path, dpi=110, bbox_inches="tight", pad_inches=0.15)  # nothing clipped
        except OSError as exc:
            raise BenchError(f"cannot write the picture {path}: {exc.strerror or exc}") from None
        finally:
            plt.close(fig)
    return path
