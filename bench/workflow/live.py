"""The workflow while playing: captures, their file, the chart and the blowing curve, fed one
reading at a time.

:class:`LiveWorkflow` bundles a :class:`~bench.workflow.captures.CaptureDetector`, a
:class:`~bench.workflow.blowing.BlowingCurveTracker` and the session's captures file. It is a
consumer of the engine (``engine.add_consumer(workflow)``, or ``Engine(consumers=[...])``):
the engine thread feeds it every reading with :meth:`LiveWorkflow.take`, and it follows the
session log the readings name, writing ``<log stem>.captures.csv`` beside it -- on the live
screen, in an unattended run and in ``bench analyze`` alike. Every public method takes a lock,
so the screen may read from its own thread while the engine feeds; the capture key is a request
the engine thread carries out (:meth:`LiveWorkflow.request_capture`), so the captures file is
only ever written on the engine thread. Nothing here waits on audio or the screen.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from pathlib import Path
from typing import Self

from bench.errors import LogError
from bench.reading import Reading
from bench.workflow.blowing import BlowingCurve, BlowingCurveTracker
from bench.workflow.captures import (
    Capture,
    CaptureDetector,
    CaptureFile,
    CaptureThresholds,
    Skip,
    captures_path_for,
    read_captures,
)
from bench.workflow.chart import TuningChart, build_chart
from bench.workflow.profiles import InstrumentProfile, get_profile

__all__ = ["LiveWorkflow"]


class LiveWorkflow:
    """Captures, chart and blowing curve of a live session.

    Parameters
    ----------
    profile : InstrumentProfile, str or None
        Instrument (a family name, a .toml path or a profile); default alto.
    log_path : Path or None
        The session's frame log; captures go to ``<log stem>.captures.csv`` beside it
        (appended to when it exists: a resumed session keeps its numbering). None: captures
        are kept in memory only.
    label : str
        Session label put on new captures ("after undercutting hole 3").
    auto : bool
        Automatic capture of settled notes.
    thresholds : CaptureThresholds or None
    on_capture : callable(Capture), optional
        Called (in the feeding thread: the engine's) with each new or updated capture; a
        screen wraps it with ``post_message``.
    on_refusal : callable(str), optional
        Called (in the feeding thread) with one line when a requested capture could not be
        taken (nothing sounding).
    clock_ppm : float or None, ppm
        The input clock's error the engine takes out of the readings (``engine.clock_ppm``),
        written with each capture.

    Raises
    ------
    LogError
        The captures file cannot be written.
    """

    def __init__(
        self,
        *,
        profile: InstrumentProfile | str | None = None,
        log_path: str | Path | None = None,
        label: str = "",
        auto: bool = True,
        thresholds: CaptureThresholds | None = None,
        on_capture: Callable[[Capture], None] | None = None,
        on_refusal: Callable[[str], None] | None = None,
        clock_ppm: float | None = None,
    ) -> None:
        self._lock = threading.Lock()
        self.on_refusal = on_refusal
        self._capture_requested = False
        self._log_path = str(log_path) if log_path is not None else None
        self.profile = get_profile(profile) if isinstance(profile, str) else (profile or get_profile("alto"))
        self.on_capture = on_capture
        self._file: CaptureFile | None = None
        self.file_error: str | None = None
        """Why the captures file stopped being written (None while all is well)."""
        earlier: list[Capture] = []
        if log_path is not None:
            path = captures_path_for(log_path)
            if path.exists() and path.stat().st_size > 0:
                earlier = read_captures(path)
            self._file = CaptureFile(path)
        self.captures_path = self._file.path if self._file else None
        self._earlier = earlier
        self._detector = CaptureDetector(
            profile=self.profile,
            label=label,
            auto=auto,
            thresholds=thresholds,
            first_index=max((c.index for c in earlier), default=0) + 1,
            clock_ppm=clock_ppm,
        )
        self._blowing = BlowingCurveTracker()
        self._last_break: BlowingCurve | None = None
        self._auto_wanted = bool(auto)
        self._auto_held = False

    # -- switches ----------------------------------------------------------------------------

    @property
    def auto(self) -> bool:
        """Automatic capture on or off (as the person set it; see :meth:`hold_auto`)."""
        return self._auto_wanted

    @auto.setter
    def auto(self, value: bool) -> None:
        with self._lock:
            self._auto_wanted = bool(value)
            self._detector.auto = self._auto_wanted and not self._auto_held

    def hold_auto(self, held: bool) -> None:
        """Hold automatic captures back (True: while the reference tone sounds, a settled note
        would be measured with the tone in it) or let them be taken again (the readings of
        the note held at that moment so far are left out of its capture); :attr:`auto` keeps
        what the person chose."""
        with self._lock:
            if self._auto_held and not held:  # the note held now was heard with the tone in it
                self._detector.forget_note_so_far()
            self._auto_held = bool(held)
            self._detector.auto = self._auto_wanted and not self._auto_held

    @property
    def auto_held(self) -> bool:
        """Automatic captures are held back (the reference tone sounds)."""
        return self._auto_held

    @property
    def label(self) -> str:
        """Session label put on new captures."""
        return self._detector.label

    @label.setter
    def label(self, value: str) -> None:
        with self._lock:
            self._detector.label = str(value)

    # -- feeding -----------------------------------------------------------------------------

    def take(self, reading: Reading) -> None:
        """Feed one reading (the engine's consumer call; see :meth:`push`)."""
        if reading.log_path != self._log_path:
            self.set_log_path(reading.log_path)
        self.push(reading)
        if self._capture_requested:
            self._capture_requested = False
            if self.capture_now() is None and self.on_refusal is not None:
                why = self.last_skip
                if why is None or why.startswith("nothing is sounding"):
                    why = "nothing is sounding to capture; play the note and press g while it sounds"
                self.on_refusal(why)

    def push(self, reading: Reading) -> list[Capture]:
        """Feed one reading; returns the captures that are new or were updated (same index,
        a register margin learnt from a break); each has been written to the captures file
        already."""
        with self._lock:
            out: list[Capture] = []
            cap = self._detector.push(reading)
            if cap is not None:
                out.append(cap)
            out += self._detector.take_updates()
            brk = self._blowing.push(reading)
            if brk is not None and brk.jump_kind != "vented":  # a leak is no limit of the breath
                self._last_break = brk
            self._store(out)
        self._tell(out)
        return out

    def request_capture(self) -> None:
        """The capture key, from any thread: the feeding thread captures the note sounding
        at its next reading (:meth:`capture_now`) and tells ``on_capture`` or ``on_refusal``."""
        self._capture_requested = True

    def set_log_path(self, log_path: str | Path | None) -> None:
        """The session log moved to a new file (or stopped): captures from now on go beside
        the new log. Captures so far stay in memory and keep their numbers."""
        with self._lock:
            self._log_path = str(log_path) if log_path is not None else None
            if self._file is not None:
                self._file.close()
                self._file = None
            self.captures_path = None
            self.file_error = None
            if log_path is not None:
                try:
                    self._file = CaptureFile(captures_path_for(log_path))
                    self.captures_path = self._file.path
                except LogError as exc:
                    self.file_error = str(exc)

    def capture_now(self, last_s: float | None = None, *, last_frames: int | None = None) -> Capture | None:
        """The capture key: capture the note sounding now from the last ``last_s`` seconds
        (default 0.5 s) or its last ``last_frames`` frames, settled or not. None when nothing
        is sounding."""
        with self._lock:
            cap = self._detector.capture_now(last_s, last_frames=last_frames)
            out = [cap] if cap is not None else []
            self._store(out)
        self._tell(out)
        return cap

    def finish(self) -> list[Capture]:
        """The stream ended: close the current note (its capture, if any, is returned)."""
        with self._lock:
            cap = self._detector.finish()
            self._blowing.finish()
            out = [cap] if cap is not None else []
            self._store(out)
        self._tell(out)
        return out

    def close(self) -> None:
        """Finish and close the captures file; safe to call twice."""
        self.finish()
        with self._lock:
            if self._file is not None:
                self._file.close()
                self._file = None

    # -- reading -----------------------------------------------------------------------------

    def captures(self) -> list[Capture]:
        """Every capture of the session (earlier runs of a resumed session first)."""
        with self._lock:
            return [*self._earlier, *self._detector.captures]

    def chart(self, label: str | None = None) -> TuningChart:
        """The tuning chart of the session so far (optionally of one label only)."""
        return build_chart(self.captures(), self.profile, label=label)

    @property
    def last_skip(self) -> str | None:
        """One line: why the newest held note (or the capture key) gave no capture -- too
        short, unsteady, locked to another note --; None once a capture is taken."""
        with self._lock:
            return self._detector.last_skip

    def newest_skip(self) -> tuple[int, Skip | None]:
        """How many held notes gave no capture so far, and the newest of them (for a screen
        that says why, without copying the whole list at every poll)."""
        with self._lock:
            skips = self._detector.skips
            return len(skips), (skips[-1] if skips else None)

    def skips(self) -> list[Skip]:
        """Every held note of the session that gave no capture, with the reason."""
        with self._lock:
            return list(self._detector.skips)

    def blowing_curve(self) -> BlowingCurve | None:
        """Blowing curve of the note sounding now (or the last one played)."""
        with self._lock:
            return self._blowing.current()

    def last_break(self) -> BlowingCurve | None:
        """Blowing curve up to the newest register break seen (overblown: a vented jump is a
        leak, not the top of the note's dynamic range), None before any."""
        with self._lock:
            return self._last_break

    # -- internals ---------------------------------------------------------------------------

    def _store(self, caps: list[Capture]) -> None:
        if self._file is None:
            return
        try:
            for cap in caps:
                self._file.write(cap)
        except LogError as exc:  # keep measuring and capturing in memory; the UI shows it
            self.file_error = str(exc)
            self._file.close()
            self._file = None

    def _tell(self, caps: list[Capture]) -> None:
        if self.on_capture is not None:
            for cap in caps:
                self.on_capture(cap)

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
