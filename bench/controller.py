"""The session controller: what a person does to a running session, without a screen.

The live screen (:mod:`bench.ui.app`) only shows and sends: each key becomes one call here,
which turns it into engine commands (:meth:`bench.engine.Engine.update_settings`,
:meth:`~bench.engine.Engine.lock`, :meth:`~bench.engine.Engine.start_log`) or workflow
requests, and answers with a :class:`Notice` -- one line for the person, with its severity --
or None when there is nothing to say. Nothing here imports textual; the tests drive it
directly. The controller owns the session workflow (captures, label, blowing curve) and
attaches it to the engine as a consumer, so captures are taken on the engine thread. It owns
the reference tone too (:class:`bench.reftone.ReferenceTone`): it starts and stops it, sets
its level and voice, feeds it the engine's readings (a consumer, like the workflow) and moves
it at once when a key changes the lock or the settings; while it sounds, automatic captures
wait and the capture key pauses it for the capture.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Literal, TypeVar

from bench.engine import Engine
from bench.errors import BenchError, SettingsError
from bench.numbers import parse_number
from bench.reading import Reading
from bench.reftone import LEVEL_STEP_DB, Opener, ReferenceTone, ToneState
from bench.tuning import TuningSettings
from bench.tuning.air import check_temp
from bench.tuning.notes import (
    note_name,
    parse_note,
    parse_pitch_class,
    pitch_class_name,
)
from bench.tuning.standards import PITCH_STANDARDS, check_a4, parse_a4
from bench.tuning.temperaments import TEMPERAMENT_IDS
from bench.workflow.captures import Capture
from bench.workflow.live import LiveWorkflow
from bench.workflow.profiles import InstrumentProfile

__all__ = ["LABEL_MAX_CHARS", "Notice", "SessionController", "check_label"]

LABEL_MAX_CHARS = 80
"""Longest session label, characters."""

_T = TypeVar("_T")
Severity = Literal["information", "warning", "error"]
TemperatureField = Literal["temp_c", "ref_temp_c"]
_WHAT: dict[TemperatureField, str] = {"temp_c": "air temperature", "ref_temp_c": "tuned-at temperature"}


@dataclass(frozen=True, slots=True)
class Notice:
    """One line for the person at the bench.

    Attributes
    ----------
    text : str
    severity : "information" | "warning" | "error"
    """

    text: str
    severity: Severity = "information"


def check_label(text: str) -> str:
    """A session label as typed, trimmed; control characters are refused.

    >>> check_label("  after undercutting hole 3 ")
    'after undercutting hole 3'

    Raises
    ------
    SettingsError
        Longer than :data:`LABEL_MAX_CHARS`, or holding a control character.
    """
    label = str(text).strip()
    if len(label) > LABEL_MAX_CHARS:
        raise SettingsError(
            f"label of {len(label)} characters is too long; keep it to {LABEL_MAX_CHARS}, e.g. 'after undercutting hole 3'"
        )
    if any(ord(ch) < 32 or ord(ch) == 127 for ch in label):
        raise SettingsError(f"label {label!r} holds a control character; type plain words")
    return label


class SessionController:
    """Settings, lock, log, label and captures of one live session.

    Parameters
    ----------
    engine : Engine
        The engine of the session (started by :meth:`start`).
    log_dir : Path
        Folder new session logs go to.
    profile : InstrumentProfile
        Instrument of the session.
    label : str
        Label put on the first captures.
    remember : callable(TuningSettings), optional
        Called after each change of settings (saving them for the next run); an error it
        raises becomes one warning, once.
    temp_followed : bool
        The air temperature follows a sensor (a typed one is then only until its next reading).
    on_capture : callable(Capture), optional
        Called on the engine thread with each new or updated capture.
    on_refusal : callable(str), optional
        Called on the engine thread when a requested capture could not be taken.
    on_tone : callable(Notice), optional
        Called from any thread with what the reference tone has to say after a key has
        returned (its output opened, or there is none); unheard without it.
    tone_opener : callable, optional
        Opens the tone's output (:func:`bench.reftone.open_default_output` by default).
    tone_background : bool
        Open the tone's output in a thread of its own (the screen never waits on it).
    """

    def __init__(
        self,
        engine: Engine,
        *,
        log_dir: Path,
        profile: InstrumentProfile,
        label: str = "",
        remember: Callable[[TuningSettings], None] | None = None,
        temp_followed: bool = False,
        on_capture: Callable[[Capture], None] | None = None,
        on_refusal: Callable[[str], None] | None = None,
        on_tone: Callable[[Notice], None] | None = None,
        tone_opener: Opener | None = None,
        tone_background: bool = True,
    ) -> None:
        self.engine = engine
        self.log_dir = Path(log_dir)
        self.profile = profile
        self.label = check_label(label)
        self.temp_followed = temp_followed
        self._remember = remember
        self._remember_failed = False
        self._on_capture = on_capture
        self._on_refusal = on_refusal
        self.workflow: LiveWorkflow | None = None
        """Captures, chart and blowing curve of the session (built by :meth:`start_workflow`)."""
        self._on_tone = on_tone
        self.tone = ReferenceTone(
            engine.settings, report=self._tone_report, opener=tone_opener, background=tone_background
        )
        """The reference tone (off until :meth:`toggle_tone` or :meth:`start_tone`)."""
        self._tone_attached = False

    # -- life cycle -------------------------------------------------------------------------

    def start_workflow(self) -> Notice | None:
        """Build the session workflow and attach it to the engine: the engine thread feeds
        it every reading; it writes captures beside the session log."""
        problem = None
        try:
            workflow = self._new_workflow(self.engine.log_path)
        except BenchError as exc:  # the captures file cannot be written: capture in memory
            workflow = self._new_workflow(None)
            workflow.file_error = str(exc)
            problem = Notice(f"captures kept in memory only: {exc}", "error")
        workflow.hold_auto(self.tone.on)
        self.workflow = workflow
        self.engine.add_consumer(workflow)
        return problem

    def _new_workflow(self, log_path: Path | None) -> LiveWorkflow:
        return LiveWorkflow(
            profile=self.profile,
            log_path=log_path,
            label=self.label,
            auto=True,
            on_capture=self._on_capture,
            on_refusal=self._on_refusal,
            clock_ppm=getattr(self.engine, "clock_ppm", None),
        )

    def close_workflow(self) -> None:
        """Detach and close the workflow (the last capture is kept); safe to call twice."""
        workflow, self.workflow = self.workflow, None
        if workflow is None:
            return
        workflow.on_capture = workflow.on_refusal = None  # nobody is listening any more
        self.engine.remove_consumer(workflow)
        try:
            workflow.close()
        except BenchError:
            pass

    # -- settings -----------------------------------------------------------------------------

    @property
    def settings(self) -> TuningSettings:
        """Settings in force."""
        return self.engine.settings

    def change(self, **changes: object) -> Notice | None:
        """Change settings in one atomic engine call and remember them; a refused value is
        one error line (the settings stay as they were)."""
        try:
            new = self.engine.update_settings(**changes)
        except (BenchError, ValueError, TypeError) as exc:
            return Notice(str(exc), "error")
        self.tone.follow(new, self.engine.locked_midi)
        if self._remember is not None:
            try:
                self._remember(new)
            except (OSError, BenchError) as exc:
                if not self._remember_failed:
                    self._remember_failed = True
                    return Notice(f"settings not remembered: {exc}", "warning")
        return None

    def step_temperament(self, step: int) -> Notice | None:
        """The next (``step`` = 1) or previous (-1) built-in temperament."""
        ids = TEMPERAMENT_IDS
        current = self.settings.temperament
        index = ids.index(current) if current in ids else -1 if step > 0 else 0
        return self.change(temperament=ids[(index + step) % len(ids)])

    def step_tonic(self, step: int) -> Notice | None:
        """The tonic ``step`` semitones up (or down)."""
        s = self.settings
        try:
            pc = parse_pitch_class(s.tonic)
        except SettingsError:
            pc = 0
        return self.change(tonic=pitch_class_name(pc + step, flats=s.flats))

    def step_a4(self, step_hz: float) -> Notice | None:
        """A4 ``step_hz`` up (or down), to 0.01 Hz."""
        a4_hz = round(self.settings.a4_hz + step_hz, 2)
        try:
            check_a4(a4_hz)
        except SettingsError as exc:
            return Notice(str(exc), "error")
        return self.change(a4_hz=a4_hz)

    def step_standard(self, step: int) -> Notice | None:
        """The next (1) or previous (-1) pitch standard's A4."""
        a4_hz = self.settings.a4_hz
        values = [std.a4_hz for std in PITCH_STANDARDS]
        if step > 0:
            after = [v for v in values if v > a4_hz + 0.005]
            target = after[0] if after else values[0]
        else:
            before = [v for v in values if v < a4_hz - 0.005]
            target = before[-1] if before else values[-1]
        return self.change(a4_hz=target)

    def step_temperature(self, field: TemperatureField, step_c: float) -> Notice | None:
        """The air (``temp_c``) or tuned-at (``ref_temp_c``) temperature ``step_c`` up or down."""
        value = round(getattr(self.settings, field) + step_c, 2)
        try:
            check_temp(value, _WHAT[field])
        except SettingsError as exc:
            return Notice(str(exc), "error")
        return self.change(**{field: value})

    def toggle_flats(self) -> Notice | None:
        """Spell notes (and the tonic) with flats, or with sharps again."""
        s = self.settings
        try:
            tonic = pitch_class_name(parse_pitch_class(s.tonic), flats=not s.flats)
        except SettingsError:
            tonic = s.tonic
        return self.change(flats=not s.flats, tonic=tonic)

    @staticmethod
    def _typed(text: str | None, parse: Callable[[str], _T], apply: Callable[[_T], Notice | None]) -> Notice | None:
        """A typed value: None (a cancelled dialog) does nothing, a refused one is one error
        line and changes nothing, an accepted one is applied."""
        if text is None:
            return None
        try:
            value = parse(text)
        except SettingsError as exc:
            return Notice(str(exc), "error")
        return apply(value)

    def type_a4(self, text: str | None) -> Notice | None:
        """A typed A4 (Hz, or a standard's name); None text is a cancelled dialog."""
        return self._typed(text, parse_a4, lambda a4_hz: self.change(a4_hz=a4_hz))

    def type_temperature(self, field: TemperatureField, text: str | None) -> Notice | None:
        """A typed temperature in degC ("21.5", "21.5 °C"); None text is a cancelled dialog."""
        if text is None:
            return None
        what = _WHAT[field]
        cleaned = text.strip().lower().removesuffix("c").removesuffix("\u00b0").strip()
        try:  # the one strict number syntax (no underscores, no inf/nan; the typographic minus is a minus)
            value = check_temp(parse_number(cleaned, what, "degrees Celsius, e.g. 21.5"), what)
        except SettingsError as exc:
            return Notice(str(exc), "error")
        notice = self.change(**{field: value})
        if notice is None and field == "temp_c" and self.temp_followed:
            return Notice("the air temperature follows a sensor; its next reading replaces this", "warning")
        return notice

    # -- target lock ----------------------------------------------------------------------------

    @property
    def locked_note(self) -> str | None:
        """Name of the note the target is locked to, or None."""
        midi = self.engine.locked_midi
        return None if midi is None else note_name(midi, flats=self.settings.flats)

    def lock(self, midi: int | None) -> Notice | None:
        """Lock the target to MIDI note ``midi``, or release it with None."""
        try:
            self.engine.lock(midi)
        except (BenchError, ValueError) as exc:
            return Notice(str(exc), "error")
        self.tone.follow(self.engine.settings, midi)
        if midi is not None:
            return Notice(f"target locked to {self.locked_note}: every reading is judged against it", "information")
        return Notice("lock released: the target follows the nearest note", "information")

    def lock_sounding(self, reading: Reading | None) -> Notice | None:
        """Lock to the note of ``reading`` (the one on screen)."""
        if reading is None or reading.mapping is None:
            return Notice("no note is sounding to lock to; play one, or press n to type a note", "error")
        return self.lock(reading.mapping.midi)

    def type_lock(self, text: str | None) -> Notice | None:
        """Lock to a typed note ("F4", "Bb5"); a bad name leaves the lock as it was."""
        return self._typed(text, parse_note, self.lock)

    # -- log and captures -------------------------------------------------------------------------

    def toggle_log(self) -> Notice | None:
        """Start a new session log in the log folder, or stop the one running."""
        try:
            if self.engine.log_path is not None:
                self.engine.stop_log()
            else:
                self.engine.start_log(self.log_dir)
        except BenchError as exc:
            return Notice(str(exc), "error")
        return None

    def capture(self) -> Notice | None:
        """The capture key: the engine thread captures the note sounding at its next reading
        (the answer comes through ``on_capture`` or ``on_refusal``); once the input is over,
        the last note there was is captured at once."""
        workflow = self.workflow
        if workflow is None:
            return None
        if self.engine.running:
            if self.tone.pause_for_capture(workflow.request_capture):
                return Notice("tone paused for the capture: it sounds again in about a second")
            workflow.request_capture()
            return None
        if workflow.capture_now() is None:
            return Notice("nothing is sounding to capture; play the note and press g while it sounds", "warning")
        return None

    def toggle_auto(self) -> Notice | None:
        """Automatic capture of settled notes on or off."""
        workflow = self.workflow
        if workflow is None:
            return None
        workflow.auto = not workflow.auto
        if workflow.auto:
            return Notice("automatic capture ON: each settled note is kept")
        return Notice("automatic capture OFF: press g to capture a note")

    def type_label(self, text: str | None) -> Notice | None:
        """Put a typed label on the next captures; one too long is refused in one line."""
        return self._typed(text, check_label, self._set_label)

    def _set_label(self, label: str) -> Notice | None:
        self.label = label
        if self.workflow is not None:
            self.workflow.label = label
        return Notice(f"next captures labelled {label!r}" if label else "next captures carry no label")

    # -- reference tone -----------------------------------------------------------------------

    @property
    def tone_state(self) -> ToneState:
        """What the reference tone is doing (for the screen)."""
        return self.tone.state

    def _tone_report(self, text: str, severity: str) -> None:
        if severity == "error":
            self._tone_changed(False)
        if self._on_tone is not None:
            self._on_tone(Notice(text, "error" if severity == "error" else "information"))

    def _tone_changed(self, on: bool) -> None:
        """Attach the tone to the engine's readings (or detach it) and hold automatic captures
        back while it sounds."""
        if on and not self._tone_attached:
            self.engine.add_consumer(self.tone)
            self._tone_attached = True
        elif not on and self._tone_attached:
            self.engine.remove_consumer(self.tone)
            self._tone_attached = False
        if self.workflow is not None:
            self.workflow.hold_auto(on)

    def start_tone(self, note: str | None = None) -> Notice | None:
        """Sound the target (``note``: a drone's own note, sounded while none is locked, as
        ``bench run --drone NOTE``); a bad note name is one error line."""
        home = None
        if note is not None:
            try:
                home = parse_note(note)
            except SettingsError as exc:
                return Notice(str(exc), "error")
        self.tone.follow(self.engine.settings, self.engine.locked_midi)
        self._tone_changed(True)
        self.tone.start(home)
        if not self.tone.on:  # the output could not open (told through on_tone)
            return None
        return Notice(self._tone_words("reference tone ON"))

    def toggle_tone(self) -> Notice | None:
        """The tone key: the target sounds, or stops."""
        if self.tone.on:
            self.tone.stop()
            self._tone_changed(False)
            return Notice("reference tone OFF")
        return self.start_tone()

    def _tone_words(self, head: str) -> str:
        state = self.tone.state
        if state.note is None:
            what = "waits for a note (play one, or lock one with l or n)"
        else:
            what = f"{state.note} {state.freq_hz:.2f} Hz"
        auto = "; automatic capture waits while it sounds" if self.workflow is not None and self.workflow.auto else ""
        return f"{head}: {what}, {state.timbre}, {state.level_dbfs:.0f} dBFS{auto}"

    def step_tone_level(self, steps: int) -> Notice:
        """The tone ``steps`` times :data:`bench.reftone.LEVEL_STEP_DB` louder (or softer)."""
        before = self.tone.level_dbfs
        level = self.tone.step_level(steps * LEVEL_STEP_DB)
        if level == before:
            end = "loudest" if steps > 0 else "softest"
            return Notice(f"tone level {level:.0f} dBFS is the {end} it goes", "warning")
        return Notice(f"tone level {level:.0f} dBFS")

    def next_tone_timbre(self) -> Notice:
        """Sine <-> soft reed-like tone."""
        try:
            timbre = self.tone.next_timbre()
        except SettingsError as exc:
            return Notice(str(exc), "error")
        return Notice(f"tone voice: {'sine' if timbre == 'sine' else 'soft reed (harmonics 1-5)'}")

    def close_tone(self) -> None:
        """Stop the tone (the session ends); safe to call twice."""
        self.tone.stop()
        self._tone_changed(False)
