"""The live bench screen: note, cents, register and harmonic balance, read from a metre or two.

The app owns the engine's life: it starts it on mount and stops it on unmount, on quit and on
Ctrl-C. Textual's loop polls :meth:`Engine.latest` with ``set_interval`` (30 Hz by default) and
never waits on audio. Rare engine events arrive on the engine thread and are posted to the app as
:class:`BenchApp.EngineReported` messages (``post_message`` is thread-safe and does not wait).

The session workflow runs beside the needle: a :class:`bench.workflow.live.LiveWorkflow` is fed
the new readings of ``engine.history`` in the same poll. It takes captures (automatically, or
with the capture key), writes them beside the session log as ``<log stem>.captures.csv``, and
feeds the tuning chart view and the blowing-curve view (:mod:`bench.ui.workflow_screens`).

Every settings change replaces the engine's immutable settings with ``dataclasses.replace`` and is
remembered with :func:`bench.config.save_settings` for the next run.
"""

from __future__ import annotations

import collections
import gc
import math
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, ClassVar

from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.css.query import NoMatches
from textual.message import Message
from textual.notifications import SeverityLevel
from textual.reactive import reactive
from textual.widgets import Footer, Label

from bench.airtemp import AirTemperatureFollower
from bench.controller import LABEL_MAX_CHARS, Notice, SessionController
from bench.engine import Engine, EngineEvent
from bench.errors import BenchError, SettingsError
from bench.reading import Reading
from bench.tuning import TuningSettings
from bench.tuning.mapping import air_correction_cents
from bench.tuning.notes import note_name, pitch_class_name
from bench.tuning.standards import (
    A4_MAX_HZ,
    A4_MIN_HZ,
    PITCH_STANDARDS,
    check_a4,
    standard_name,
)
from bench.tuning.temperaments import TEMPERAMENT_IDS, get_temperament
from bench.ui.blowing_plot import BlowingPlot, shown_slope
from bench.ui.capture_line import CaptureLine
from bench.ui.commands import BenchCommands
from bench.ui.deviation import DeviationScale
from bench.ui.dialogs import ValueDialog
from bench.ui.harmonics import HarmonicBars
from bench.ui.help_screen import KeyGuide, binding_rows
from bench.ui.model_view import ModelScreen
from bench.ui.notices import KEEP_S, NoticeLine, ShownNotice
from bench.ui.panels import DetailLine, SessionBar, SettingsPanel
from bench.ui.readout import CentsFace, NoteFace, offset_side
from bench.ui.register import RegisterBanner
from bench.ui.trail import PitchTrail
from bench.ui.tuning_map import TuningMap
from bench.ui.workflow_screens import BlowingScreen, ChartScreen, WorkflowView
from bench.workflow.captures import Capture
from bench.workflow.chart import TuningChart
from bench.workflow.live import LiveWorkflow
from bench.workflow.profiles import InstrumentProfile, get_profile

if TYPE_CHECKING:
    from bench.model.geometry import Geometry
    from bench.model.live import ModelReport

POLL_HZ = 30.0
"""Default screen update rate, polls of ``engine.latest()`` per second."""

TRAIL_WINDOW_S = 10.0
"""Seconds of pitch history on the trail."""

_NOTICES_KEPT = 4  # notices on the line at once, newest first
_STATS_EVERY = 6  # polls between reads of engine.stats (5 Hz at 30 Hz)
_LOAD_SPAN_S = 3.0  # the analysis load shown is averaged over this long, seconds
_TRAIL_EVERY = 3  # polls between reads of engine.history (10 Hz at 30 Hz)
_EARLY_EVENTS = 64  # events kept while the app is not yet listening
_BLOWING_EVERY = 3  # polls between blowing-curve updates on its view (10 Hz at 30 Hz)
DEFAULT_PROFILE = "alto"
"""Instrument profile when none is given."""
MODEL_DEBOUNCE_S = 0.6
"""The model view refits this long after the last capture (captures often come in a run)."""




@dataclass(frozen=True, slots=True)
class Control:
    """One runtime control: its keys, the action it runs, and its words.

    Attributes
    ----------
    keys : str
        Textual key names, comma-separated (the first is the main one).
    action : str
        Action string run on the app, e.g. ``"a4(0.1)"``.
    label : str
        A word or two for the footer.
    description : str
        What it does, in the key guide and the command list.
    footer : bool
        Shown in the footer line.
    """

    keys: str
    action: str
    label: str
    description: str
    footer: bool = False


CONTROLS: tuple[Control, ...] = (
    Control("t", "temperament(1)", "temperament", "Next temperament", True),
    Control("T", "temperament(-1)", "temperament back", "Previous temperament"),
    Control("k", "tonic(1)", "tonic", "Tonic a semitone up", True),
    Control("K", "tonic(-1)", "tonic down", "Tonic a semitone down"),
    Control("right,right_square_bracket", "a4(0.1)", "A4 +0.1", "A4 up 0.1 Hz"),
    Control("left,left_square_bracket", "a4(-0.1)", "A4 -0.1", "A4 down 0.1 Hz"),
    Control("shift+right,right_curly_bracket", "a4(1.0)", "A4 +1", "A4 up 1 Hz"),
    Control("shift+left,left_curly_bracket", "a4(-1.0)", "A4 -1", "A4 down 1 Hz"),
    Control("p", "standard(1)", "standard", "Next pitch standard (A4 preset)"),
    Control("P", "standard(-1)", "standard back", "Previous pitch standard (A4 preset)"),
    Control("a", "type_a4", "type A4", "Type A4 in Hz, or a pitch standard's name", True),
    Control("up", "air(0.5)", "air +", "Air temperature up 0.5 \u00b0C"),
    Control("down", "air(-0.5)", "air -", "Air temperature down 0.5 \u00b0C"),
    Control("shift+up,plus", "ref(0.5)", "tuned-at +", "Tuned-at temperature up 0.5 \u00b0C"),
    Control("shift+down,minus", "ref(-0.5)", "tuned-at -", "Tuned-at temperature down 0.5 \u00b0C"),
    Control("c", "type_air", "type air", "Type the air temperature (\u00b0C)"),
    Control("r", "type_ref", "type tuned-at", "Type the tuned-at (reference) temperature (\u00b0C)"),
    Control("l", "lock_sounding", "lock", "Lock the target to the note sounding now", True),
    Control("n", "type_lock", "lock to…", "Type a note to lock the target to"),
    Control("u", "release", "release", "Release the lock: follow the nearest note"),
    Control("f", "flats", "flats/sharps", "Spell notes with flats / with sharps"),
    Control("s", "log", "log", "Start / stop the session log (a new file each start)", True),
    Control("space", "hold", "hold", "Hold the view still / let it run again", True),
    Control("x", "raw", "raw", "Big figure: raw cents / air-corrected cents"),
    Control("g,enter", "capture", "capture", "Capture the note sounding now (its last half second)", True),
    Control("G", "auto_capture", "auto capture", "Automatic capture of settled notes on / off"),
    Control("e", "type_label", "label", "Type the session label put on the next captures"),
    Control("v", "chart_view", "chart", "Tuning chart view: the compass against its targets", True),
    Control("w", "blowing_view", "blowing", "Blowing-curve view: slope in c/dB, break level", True),
    Control("m", "model_view", "model", "Model view: captured notes against the instrument model, and its fit", True),
    Control("escape", "live_view", "live", "Back to the live view"),
    Control("o", "tone", "tone", "Reference tone on / off: the target note sounds through the output"),
    Control("O", "tone_voice", "tone voice", "Reference tone voice: sine / soft reed"),
    Control("full_stop", "tone_level(1)", "tone +3 dB", "Reference tone 3 dB louder"),
    Control("comma", "tone_level(-1)", "tone -3 dB", "Reference tone 3 dB softer"),
    Control("question_mark,f1,h", "guide", "keys", "Key guide (this list)", True),
    Control("q", "quit", "quit", "Quit (stops the engine and closes the log)", True),
)


class EventRelay:
    """Hand engine events to the app, from any thread, without waiting.

    Build it before the engine and pass it as the engine's ``on_event``; :func:`run_app`
    connects it to the app. Events that arrive before the app listens are kept (up to 64)
    and delivered when it does.
    """

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._target: Callable[[EngineEvent], None] | None = None
        self._early: collections.deque[EngineEvent] = collections.deque(maxlen=_EARLY_EVENTS)

    def __call__(self, event: EngineEvent) -> None:
        with self._lock:
            target = self._target
            if target is None:
                self._early.append(event)
                return
        target(event)

    def connect(self, target: Callable[[EngineEvent], None] | None) -> None:
        """Send events to ``target`` from now on (None: keep them again)."""
        with self._lock:
            self._target = target
            early, self._early = list(self._early), collections.deque(maxlen=_EARLY_EVENTS)
        if target is not None:
            for event in early:
                target(event)


class BenchApp(App[int]):
    """The bench screen.

    Parameters
    ----------
    engine : Engine
        A built, not yet started :class:`bench.engine.Engine` (or anything with its API).
    log_dir : Path, optional
        Folder new session logs go to (``engine.start_log(log_dir)``);
        :func:`bench.config.default_log_dir` if None.
    events : EventRelay, optional
        The relay the engine was built with as ``on_event``; the app connects to it on mount.
    notice : str, optional
        One line shown when the screen opens (e.g. which input was chosen and why).
    settings_path : Path, optional
        Where settings are remembered; :func:`bench.config.save_settings`'s default if None.
    remember : bool
        Save settings changes for the next run.
    poll_hz : float > 0
        Screen updates per second.
    temp_follower : object, optional
        Something that keeps the engine's air temperature up to date from a sensor
        (``bench.airtemp.AirTemperatureFollower``); the screen says the air is followed.
    profile : InstrumentProfile or str, optional
        Instrument of the session: a built-in name (``alto``, ``soprano``...), a ``.toml``
        profile file, or a profile; the alto if None.
    label : str
        Session label put on the first captures (changed with the label key).
    tone_note : str, optional
        Sound the reference tone from the start, on this note while none is locked
        (``bench run --drone NOTE``).
    tone_opener : callable, optional
        Opens the reference tone's output (the tests give a stand-in); the default output if None.
    tone_level_dbfs : float, optional
        Its starting peak level, dBFS (``--drone-level-db``); -18 if None.
    geometry : Geometry, optional
        The instrument's geometry for the model view; the built-in geometry of the profile if
        None (:func:`bench.model.geometry.geometry_for_profile`).

    Raises
    ------
    SettingsError
        An unknown profile, a bad profile file, or a label too long.
    """

    CSS_PATH = Path(__file__).with_name("bench.tcss")  # absolute, so subclasses find it too
    TITLE = "bench"
    COMMANDS = App.COMMANDS | {BenchCommands}
    BINDINGS: ClassVar[list[Binding | tuple[str, str] | tuple[str, str, str]]] = [
        *(Binding(c.keys, c.action, c.label, show=c.footer, tooltip=c.description) for c in CONTROLS),
        Binding("ctrl+c", "quit", "quit", show=False, priority=True, tooltip=CONTROLS[-1].description),
    ]

    class CaptureTaken(Message):
        """The workflow took or updated a capture (posted from the engine thread)."""

        def __init__(self, capture: Capture) -> None:
            super().__init__()
            self.capture = capture

    class ModelRefreshed(Message):
        """The model was refitted to the captures (posted from the worker thread)."""

        def __init__(self, report: ModelReport, generation: int) -> None:
            super().__init__()
            self.report = report
            self.generation = generation

    class CaptureRefused(Message):
        """A requested capture could not be taken (posted from the engine thread)."""

        def __init__(self, text: str) -> None:
            super().__init__()
            self.text = text

    class ToneReported(Message):
        """The reference tone's word after a key returned: its output opened, or there is none
        (posted from the thread that opened it)."""

        def __init__(self, notice: Notice) -> None:
            super().__init__()
            self.notice = notice

    class EngineReported(Message):
        """The engine reported a rare event (register jump, source ended, device lost, log...)."""

        def __init__(self, event: EngineEvent) -> None:
            super().__init__()
            self.event = event
            """The :class:`bench.engine.EngineEvent`."""

    reading: reactive[Reading | None] = reactive(None, always_update=True, init=False, repaint=False)
    """The reading on screen (the views repaint themselves: no repaint of the whole app)."""
    settings: reactive[TuningSettings | None] = reactive(None, init=False, repaint=False)
    """Settings the engine applies now."""
    held: reactive[bool] = reactive(False, init=False, repaint=False)
    """True while the view is held still (the engine keeps measuring and logging)."""
    show_raw: reactive[bool] = reactive(False, init=False, repaint=False)
    """True when the big figure shows raw cents instead of air-corrected ones."""
    locked_note: reactive[str | None] = reactive(None, init=False, repaint=False)
    """Note the target is locked to, or None."""

    def __init__(
        self,
        engine: Engine,
        *,
        log_dir: Path | None = None,
        events: EventRelay | None = None,
        notice: str | None = None,
        settings_path: Path | None = None,
        remember: bool = True,
        poll_hz: float = POLL_HZ,
        temp_follower: AirTemperatureFollower | None = None,
        profile: InstrumentProfile | str | None = None,
        label: str = "",
        tone_note: str | None = None,
        tone_opener: Any = None,
        tone_level_dbfs: float | None = None,
        geometry: Geometry | None = None,
    ) -> None:
        super().__init__()
        if not poll_hz > 0:
            raise SettingsError(f"screen rate {poll_hz} Hz must be above 0; use e.g. 30")
        self.engine = engine
        if log_dir is None:
            from bench.config import default_log_dir

            log_dir = default_log_dir()
        self.log_dir = Path(log_dir)
        self.events = events
        self.notice = notice
        self.settings_path = settings_path
        self.remember = remember
        self.poll_hz = float(poll_hz)
        self.temp_follower = temp_follower
        self.start_error: BaseException | None = None
        """Error the engine raised on start; :func:`run_app` re-raises it."""
        self.readings_shown = 0
        """Readings put on screen so far (the benchmark divides it by time)."""
        self._polls = 0
        self._load_samples: collections.deque[tuple[float, float]] = collections.deque()
        self._views: dict[Any, Any] = {}
        if profile is None:
            profile = DEFAULT_PROFILE
        self.profile: InstrumentProfile = get_profile(profile) if isinstance(profile, str) else profile
        """Instrument of the session."""
        self.session = SessionController(
            engine,
            log_dir=self.log_dir,
            profile=self.profile,
            label=label,
            remember=self._save_settings if remember else None,
            temp_followed=temp_follower is not None,
            on_capture=self._capture_from_engine,
            on_refusal=self._refusal_from_engine,
            on_tone=self._tone_from_thread,
            tone_opener=tone_opener,
        )
        self.tone_note = tone_note
        if tone_level_dbfs is not None:
            self.session.tone.level_dbfs = float(tone_level_dbfs)
        """What the keys do to the session (settings, lock, log, label, captures): no Textual in it."""
        self.chart: TuningChart | None = None
        """Tuning chart of the captures so far."""
        self._captures_file_shown: tuple[Path | None, str | None] = (None, None)
        self._notices: list[ShownNotice] = []
        self._skips_told = 0
        self._seen_captures: set[int] = set()
        self._last_capture: Any = None
        self._blowing_line = ""
        self.geometry: Geometry | None = geometry
        """Instrument geometry of the model view (resolved from the profile when first needed)."""
        self.model_report: ModelReport | None = None
        """The latest report of the model view (captures against the model, and the fit)."""
        self._geometry_problem = ""
        self._model_generation = 0  # captures seen, as a version number
        self._model_shown_generation = -1  # captures the latest report was made from
        self._model_due_s: float | None = None  # when the debounced refit starts
        self._model_busy = False

    # -- building -------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield SessionBar(id="session")
        with Horizontal(id="readout"):
            with Vertical(id="note-box"):
                yield NoteFace(id="note")
                yield Label("note", id="note-caption")
            with Vertical(id="cents-box"):
                yield CentsFace(id="cents")
                yield Label("cents, air-corrected", id="cents-caption")
        yield DeviationScale(id="scale")
        yield DetailLine(id="detail")
        yield RegisterBanner(id="register")
        yield CaptureLine(id="captures", classes="capture-line")
        yield NoticeLine(id="notices", classes="notice-line")
        with Horizontal(id="lower"):
            yield HarmonicBars(id="harmonics")
            yield PitchTrail(id="trail")
            yield SettingsPanel(id="tuning")
        yield Footer()

    def _view(self, selector: Any, expect_type: Any = None) -> Any:
        """A widget of the main screen (found once; dialogs on top do not hide it)."""
        key = (selector, expect_type)
        widget = self._views.get(key)
        if widget is None:
            widget = self._main_screen.query_one(selector, expect_type)
            self._views[key] = widget
        return widget

    def on_mount(self) -> None:
        self._main_screen = self.screen
        # Find every live widget now, while the screen holds them: a poll that comes during
        # shutdown, after the widgets were removed, then sets values on them instead of
        # failing to find them (seen under load when another view was on top until the end).
        for selector in (NoteFace, CentsFace, DeviationScale, DetailLine, HarmonicBars, PitchTrail,
                         RegisterBanner, CaptureLine, SessionBar, SettingsPanel):
            self._view(selector)
        for caption in ("#cents-caption", "#note-caption"):
            self._view(caption, Label)
        self._view("#harmonics").border_title = "harmonic balance"
        self._view("#trail").border_title = f"trail {TRAIL_WINDOW_S:.0f} s"
        self._view("#tuning").border_title = (
            "tuning in force" if self.temp_follower is None else "tuning \u00b7 air followed"
        )
        self._view(PitchTrail).window_s = TRAIL_WINDOW_S
        self._connect_events(self.engine_event)
        try:
            self.engine.start()
        except BenchError as exc:
            self.start_error = exc
            self.exit(2, return_code=2)
            return
        self.settings = self.engine.settings
        self._show_lock()
        self._start_workflow()
        if self.tone_note is not None:
            self._tell(self.session.start_tone(self.tone_note))
        self._refresh_session()
        self.on_resize()
        if self.notice:
            self.notify(self.notice, timeout=6)
        self.set_interval(1.0 / self.poll_hz, self._poll)
        self.call_after_refresh(self._freeze_startup_objects)

    def _freeze_startup_objects(self) -> None:
        """Leave the objects of start-up (modules, the built screen) out of the garbage
        collector's full passes: with them in, each full pass held the screen for about
        0.1 s on a loaded machine (measured, benchmarks/bench_ui.py). Undone on unmount."""
        gc.collect()
        gc.freeze()
        self._froze_gc = True

    def on_resize(self, event: object = None) -> None:
        """Give the big figures twice the height on a tall terminal, the panels more width
        on a wide one."""
        screen = getattr(self, "_main_screen", None)
        if screen is not None:
            screen.set_class(self.size.height >= 34, "-tall")
            screen.set_class(self.size.width >= 120, "-wide")

    @property
    def workflow(self) -> LiveWorkflow | None:
        """Captures, chart and blowing curve of the session (built on mount)."""
        return self.session.workflow

    @property
    def session_label(self) -> str:
        """Label put on new captures."""
        return self.session.label

    def notify(
        self,
        message: str,
        *,
        title: str = "",
        severity: SeverityLevel = "information",
        timeout: float | None = None,
        markup: bool = True,
    ) -> None:
        """Put a notice on the notice line (never a pop-up over the readings), newest first,
        for ``timeout`` seconds or as long as its severity asks (:data:`bench.ui.notices.KEEP_S`)."""
        text = f"{title}: {message}" if title else str(message)
        keep_s = KEEP_S.get(severity, KEEP_S["information"]) if timeout is None else max(float(timeout), 1.0)
        now_s = time.monotonic()
        kept = [n for n in self._notices if n.until_s > now_s and n.text != text]
        self._notices = [ShownNotice(text, severity, now_s + keep_s), *kept][:_NOTICES_KEPT]
        self._show_notices()

    def _show_notices(self) -> None:
        now_s = time.monotonic()
        self._notices = [n for n in self._notices if n.until_s > now_s]
        shown = tuple(self._notices)
        for screen in self.screen_stack:
            for line in screen.query(NoticeLine):
                line.notices = shown

    def _tell(self, notice: Notice | None) -> None:
        """Show the controller's answer to a key, if it has one."""
        if notice is not None:
            timeout = 8 if notice.severity == "error" else 3
            self.notify(notice.text, severity=notice.severity, timeout=timeout)

    def on_unmount(self) -> None:
        workflow = self.workflow
        if workflow is not None:  # the screen is going: no notes to show
            workflow.on_capture = workflow.on_refusal = None
        self.session.close_tone()
        self._stop_engine()
        self.session.close_workflow()
        if getattr(self, "_froze_gc", False):
            gc.unfreeze()
            self._froze_gc = False

    def _connect_events(self, handler: Callable[[EngineEvent], None] | None) -> None:
        """Point the engine's events at ``handler`` (None: disconnect)."""
        if self.events is not None:
            self.events.connect(handler)
        else:
            self.engine.on_event = handler  # settable property of bench.engine.Engine

    def _stop_engine(self) -> None:
        self._connect_events(None)
        try:
            self.engine.stop()
        except BenchError as exc:  # the log closed badly: say so on the terminal afterwards
            self.start_error = self.start_error or exc

    # -- engine hand-off --------------------------------------------------------------

    def engine_event(self, event: EngineEvent) -> None:
        """The engine's ``on_event``: called on the engine thread, posts and returns at once."""
        self.post_message(self.EngineReported(event))

    def _poll(self) -> None:
        self._polls += 1
        if self._model_due_s is not None and not self._model_busy and time.monotonic() >= self._model_due_s:
            self._start_model_fit()
        if self._polls % _STATS_EVERY == 0:
            self._refresh_session()
            if self._notices:
                self._show_notices()  # let old notices go
        top = self._top_screen()
        if isinstance(top, WorkflowView):  # the live widgets are hidden: leave them be
            if isinstance(top, BlowingScreen) and self._polls % _BLOWING_EVERY == 0 and not self.held:
                self._refresh_blowing(top)
            elif isinstance(top, ChartScreen):
                if self._polls % _BLOWING_EVERY == 0 and not self.held:
                    self._refresh_blowing(top)
                if self._polls % _STATS_EVERY == 0:
                    self._refresh_chart_blowing_line(top)
            return
        if self.held:
            return
        if self._polls % _TRAIL_EVERY == 0:
            self._refresh_trail()
        reading = self.engine.latest()
        if reading is None or reading is self.reading:
            return
        self.reading = reading
        self.readings_shown += 1

    def _refresh_trail(self) -> None:
        raw = self.show_raw
        points = tuple(
            (r.stream_time_s, None if r.mapping is None else (r.mapping.cents_raw if raw else r.mapping.cents))
            for r in self.engine.history(TRAIL_WINDOW_S)
        )
        self._view(PitchTrail).points = points

    def _refresh_session(self) -> None:
        if self.engine.settings is not self.settings:  # changed elsewhere, e.g. a sensor
            self.settings = self.engine.settings
        stats = self.engine.stats
        bar = self._view(SessionBar)
        bar.source = stats.source
        bar.clock_ppm = self.engine.clock_ppm
        tone = self.session.tone_state
        bar.tone, bar.tone_short = tone.describe(), tone.describe(short=True)
        bar.state = stats.state
        bar.dropped_blocks = stats.dropped_blocks
        bar.analysis_load_pct = self._analysis_load_pct(stats.cpu_s)
        log_path = self.engine.log_path
        bar.log_path = None if log_path is None else str(log_path)
        self._tell_captures_file()
        self._tell_skips()

    def _analysis_load_pct(self, cpu_s: float | None) -> float | None:
        """Analysis-thread CPU seconds per wall second over the last ~3 s, percent (None: unknown yet)."""
        if cpu_s is None:
            return None
        samples = self._load_samples
        now_s = time.monotonic()
        samples.append((now_s, cpu_s))
        while len(samples) > 2 and now_s - samples[1][0] >= _LOAD_SPAN_S:
            samples.popleft()
        t0_s, cpu0_s = samples[0]
        if now_s - t0_s < 0.5:
            return None
        return max(0.0, 100.0 * (cpu_s - cpu0_s) / (now_s - t0_s))

    def on_bench_app_engine_reported(self, message: EngineReported) -> None:
        event = message.event
        kind, text = event.kind, event.message
        if kind in ("device_lost", "source_error", "source_ended"):
            self._view(SessionBar).problem = text
        elif kind == "device_back":
            self._view(SessionBar).problem = ""
        if kind in ("device_lost", "source_error", "log_error"):
            self.notify(text, title=kind.replace("_", " "), severity="error", timeout=8)
        elif kind in ("jump", "source_ended"):
            self.notify(text, severity="warning", timeout=4)
        elif kind in ("device_back", "log_started", "log_stopped"):
            self.notify(text, timeout=4)
        self._refresh_session()

    # -- watchers: push display state into the widgets ---------------------------------

    def watch_reading(self, reading: Reading | None) -> None:
        # Values are rounded to what each view can show, so that a view whose figure has
        # not changed is not drawn again (a reactive set to an equal value does nothing).
        if reading is None:
            return
        frame, mapping = reading.frame, reading.mapping
        sounding = mapping is not None
        note, cents_face = self._view(NoteFace), self._view(CentsFace)
        note.sounding = cents_face.sounding = sounding
        scale, detail = self._view(DeviationScale), self._view(DetailLine)
        if mapping is not None:
            shown = mapping.cents_raw if self.show_raw else mapping.cents
            note.note = mapping.note
            cents_face.cents = float(round(shown))
            scale.cents = round(shown, 1)
            detail.cents, detail.cents_raw = round(mapping.cents, 1), round(mapping.cents_raw, 1)
            detail.target_hz = round(mapping.target_hz, 2)
            detail.f0_hz = None if frame.f0_hz is None else round(frame.f0_hz, 2)
        else:
            scale.cents = None
        banner = self._view(RegisterBanner)
        banner.register, banner.jump = frame.register, frame.jump
        bars = self._view(HarmonicBars)
        if frame.harmonics_db is not None or not sounding:
            bars.harmonics_db = (
                None if frame.harmonics_db is None else tuple(round(h) for h in frame.harmonics_db)
            )
            bars.odd_even_db = None if frame.odd_even_db is None else round(frame.odd_even_db, 1)
        bar = self._view(SessionBar)
        level = frame.level_dbfs
        bar.level_dbfs = round(level, 1) if math.isfinite(level) else level
        bar.clipped = frame.clipped
        bar.dropped_blocks = reading.dropped_blocks
        bar.log_path = reading.log_path

    def watch_settings(self, settings: TuningSettings | None) -> None:
        if settings is None:
            return
        panel = self._view(SettingsPanel)
        panel.settings = settings
        try:
            panel.temperament_name = get_temperament(settings.temperament).name
        except BenchError:
            panel.temperament_name = settings.temperament
        name = standard_name(settings.a4_hz) or ""
        # "baroque 415" beside "415.0 Hz": the words are enough
        panel.standard_name = name.removesuffix(f" {settings.a4_hz:g}")
        panel.correction_cents = air_correction_cents(settings)
        self._show_lock()

    def watch_held(self, held: bool) -> None:
        self._view(SessionBar).held = held

    def watch_show_raw(self, show_raw: bool) -> None:
        self._view(DetailLine).main_is_raw = show_raw
        caption = "cents, RAW (no air correction)" if show_raw else "cents, air-corrected"
        self._view("#cents-caption", Label).update(caption)
        self._view("#cents-caption", Label).set_class(show_raw, "-raw")
        if self.reading is not None:
            self.reading = self.reading  # redraw the figures with the other cents
        self._refresh_trail()

    def watch_locked_note(self, locked_note: str | None) -> None:
        self._view(SettingsPanel).locked_note = locked_note
        self._view(DetailLine).locked_note = locked_note
        self._view("#note-caption", Label).update(
            f"note, LOCKED to {locked_note}" if locked_note else "note"
        )

    def _show_lock(self) -> None:
        midi = self.engine.locked_midi
        flats = self.engine.settings.flats
        self.locked_note = None if midi is None else note_name(midi, flats=flats)

    # -- settings -----------------------------------------------------------------------

    def change_settings(self, **changes: Any) -> bool:
        """Change settings through the controller, show them; False (after a one-line
        error) when the engine refuses them."""
        notice = self.session.change(**changes)
        self._after_settings(notice)
        return notice is None or notice.severity != "error"

    def _after_settings(self, notice: Notice | None) -> None:
        self._tell(notice)
        self.settings = self.engine.settings
        self._show_lock()

    def _save_settings(self, settings: TuningSettings) -> None:
        from bench.config import save_settings

        save_settings(settings, self.settings_path)

    def action_temperament(self, step: int) -> None:
        self._after_settings(self.session.step_temperament(step))

    def action_tonic(self, step: int) -> None:
        self._after_settings(self.session.step_tonic(step))

    def action_a4(self, step_hz: float) -> None:
        self._after_settings(self.session.step_a4(step_hz))

    def action_standard(self, step: int) -> None:
        self._after_settings(self.session.step_standard(step))

    def action_air(self, step_c: float) -> None:
        self._after_settings(self.session.step_temperature("temp_c", step_c))

    def action_ref(self, step_c: float) -> None:
        self._after_settings(self.session.step_temperature("ref_temp_c", step_c))

    def action_flats(self) -> None:
        self._after_settings(self.session.toggle_flats())

    # -- typed values ---------------------------------------------------------------------

    def action_type_a4(self) -> None:
        names = ", ".join(std.name for std in PITCH_STANDARDS if std.a4_hz in (415.0, 440.0))
        self.push_screen(
            ValueDialog(
                "A4 in Hz, or a pitch standard name",
                f"{self.engine.settings.a4_hz:g}",
                f"{A4_MIN_HZ:g}-{A4_MAX_HZ:g} Hz, or e.g. {names}",
            ),
            self.apply_typed_a4,
        )

    def apply_typed_a4(self, text: str | None) -> None:
        """Apply a typed A4 (Hz or a standard's name); a bad value leaves A4 as it was."""
        self._after_settings(self.session.type_a4(text))

    def action_type_air(self) -> None:
        self.push_screen(
            ValueDialog("Air temperature, \u00b0C", f"{self.engine.settings.temp_c:g}", "e.g. 23.5"),
            self.apply_typed_air,
        )

    def apply_typed_air(self, text: str | None) -> None:
        """Apply a typed air temperature in degC; a bad value leaves it as it was."""
        self._after_settings(self.session.type_temperature("temp_c", text))

    def action_type_ref(self) -> None:
        self.push_screen(
            ValueDialog(
                "Temperature the instrument is to be in tune at, \u00b0C",
                f"{self.engine.settings.ref_temp_c:g}",
                "often 20",
            ),
            self.apply_typed_ref,
        )

    def apply_typed_ref(self, text: str | None) -> None:
        """Apply a typed reference temperature in degC; a bad value leaves it as it was."""
        self._after_settings(self.session.type_temperature("ref_temp_c", text))

    # -- target lock ------------------------------------------------------------------------

    def action_lock_sounding(self) -> None:
        self._after_lock(self.session.lock_sounding(self.reading))

    def action_type_lock(self) -> None:
        self.push_screen(
            ValueDialog("Note to lock the target to", self.locked_note or "", "e.g. F4, C#5, Bb5"),
            self.apply_typed_lock,
        )

    def apply_typed_lock(self, text: str | None) -> None:
        """Lock to a typed note (``F4``, ``Bb5``); a bad name leaves the lock as it was."""
        self._after_lock(self.session.type_lock(text))

    def lock_target(self, midi: int | None) -> None:
        """Lock the target to MIDI note ``midi``, or release it with None."""
        self._after_lock(self.session.lock(midi))

    def _after_lock(self, notice: Notice | None) -> None:
        self._tell(notice)
        self._show_lock()

    def action_release(self) -> None:
        self.lock_target(None)

    # -- session, view ---------------------------------------------------------------------------

    def action_log(self) -> None:
        self._tell(self.session.toggle_log())
        self._refresh_session()

    def action_hold(self) -> None:
        self.held = not self.held

    def action_raw(self) -> None:
        self.show_raw = not self.show_raw

    # -- session workflow: captures, label, chart and blowing views ----------------------------

    def _start_workflow(self) -> None:
        """Build the session workflow (the controller attaches it to the engine)."""
        self._tell(self.session.start_workflow())
        workflow = self.session.workflow
        assert workflow is not None
        self._seen_captures = {c.index for c in workflow.captures()}
        self.chart = workflow.chart()
        self._captures_file_shown = (workflow.captures_path, workflow.file_error)
        self._show_workflow()

    def _capture_from_engine(self, cap: Capture) -> None:
        """The workflow's ``on_capture``: called on the engine thread, posts and returns."""
        self.post_message(self.CaptureTaken(cap))

    def _refusal_from_engine(self, text: str) -> None:
        """The workflow's ``on_refusal``: called on the engine thread, posts and returns."""
        self.post_message(self.CaptureRefused(text))

    def on_bench_app_capture_taken(self, message: CaptureTaken) -> None:
        self._on_capture(message.capture)

    def on_bench_app_capture_refused(self, message: CaptureRefused) -> None:
        self.notify(message.text, severity="warning")

    def _top_screen(self) -> Any:
        """The screen on top, or None while the app is closing."""
        stack = self.screen_stack
        return stack[-1] if stack else None

    def _tell_captures_file(self) -> None:
        """Say where captures go when that changed (the workflow follows the session log
        on the engine thread)."""
        workflow = self.workflow
        if workflow is None:
            return
        shown = (workflow.captures_path, workflow.file_error)
        if shown == self._captures_file_shown:
            return
        self._captures_file_shown = shown
        if workflow.file_error is not None:
            self.notify(f"captures kept in memory only: {workflow.file_error}", severity="error", timeout=8)
        elif workflow.captures_path is not None:
            self.notify(f"captures go to {workflow.captures_path.name}", timeout=4)
        self._show_workflow()

    def _tell_skips(self) -> None:
        """Say why a held note gave no capture (too short, unsteady, broke, locked elsewhere)."""
        workflow = self.workflow
        if workflow is None:
            return
        count, newest = workflow.newest_skip()
        if count > self._skips_told and newest is not None:
            self.notify(str(newest), severity="warning")
        self._skips_told = count

    def _on_capture(self, cap: Capture) -> None:
        """A capture was taken or updated (in the UI thread, from the engine's message)."""
        new = cap.index not in self._seen_captures
        self._seen_captures.add(cap.index)
        last = self._last_capture
        if new or (last is not None and last.index == cap.index):  # a margin learnt later: not newer
            self._last_capture = cap
        self.chart = self.workflow.chart() if self.workflow is not None else None
        self._model_generation += 1
        if isinstance(self._top_screen(), ModelScreen):
            self._model_due_s = time.monotonic() + MODEL_DEBOUNCE_S
        self._show_workflow()
        if new:
            how = "by key" if cap.source == "manual" else "auto"
            self.notify(
                f"captured {cap.note} R{cap.register}  {_cents_words(cap.cents)}"
                f"  (\u00b1{cap.cents_spread:.1f} c, {how})",
                timeout=3,
            )
        elif cap.register_margin_db is not None:
            self.notify(
                f"{cap.note} R{cap.register}: {cap.register_margin_db:.1f} dB of breath to spare before it broke",
                timeout=4,
            )

    def _show_workflow(self) -> None:
        """Put the capture state on the live screen and on the workflow view shown."""
        self._fill_capture_line(self._view(CaptureLine))
        top = self._top_screen()
        if isinstance(top, WorkflowView):
            self.fill_workflow_view(top)

    def _fill_capture_line(self, line: CaptureLine) -> None:
        workflow, chart = self.workflow, self.chart
        if workflow is None:
            return
        line.auto = workflow.auto
        line.taken = len(self._seen_captures)
        cap = self._last_capture
        line.last = "" if cap is None else f"{cap.note} R{cap.register} {_cents_words(cap.cents, short=True)}"
        line.label = workflow.label
        line.instrument = self.profile.name
        if chart is not None:
            line.unchecked = len(chart.unchecked())
            line.compass = sum(1 for e in chart.entries if e.expected)
        line.problem = workflow.file_error or ""

    def fill_workflow_view(self, view: Any) -> None:
        """Show the state of the moment on a workflow view (called when it is shown)."""
        self._show_notices()
        line = _find(view, CaptureLine)
        if line is None:  # not composed yet: it fills itself when shown
            return
        self._fill_capture_line(line)
        if isinstance(view, ChartScreen):
            chart = self.chart
            p = self.profile
            checked = 0 if chart is None else sum(1 for e in chart.entries if e.expected and e.capture is not None)
            total = 0 if chart is None else sum(1 for e in chart.entries if e.expected)
            written = "" if not p.written_offset_semitones else "  \u00b7  names at written pitch"
            view.query_one("#chart-title", Label).update(
                f"Tuning chart \u00b7 {p.title} ({p.name}) \u00b7 {checked} of {total} notes checked{written}"
            )
            view.query_one(TuningMap).chart = chart
            cap = self._last_capture
            if cap is None:
                last = "no capture yet: hold a note steady, or press g while it sounds"
            else:
                margin = "" if cap.register_margin_db is None else f", {cap.register_margin_db:.1f} dB to the break"
                last = (
                    f"last capture #{cap.index}: {cap.note} R{cap.register} {_cents_words(cap.cents)} "
                    f"\u00b1{cap.cents_spread:.1f} c at {cap.level_dbfs:.1f} dBFS{margin}"
                    f"  [{cap.temperament} on {cap.tonic}, A4 {cap.a4_hz:g} Hz]"
                )
            view.query_one("#chart-last", Label).update(last)
            self._refresh_chart_blowing_line(view)
        if isinstance(view, ModelScreen):
            self._fill_model_view(view)
            return
        self._refresh_blowing(view)

    # -- the model view: captures against the instrument model, refitted in a worker ------------

    def _model_geometry(self) -> Geometry | None:
        """The session's geometry (the profile's built-in one unless one was given), or None
        with the reason kept for the view."""
        if self.geometry is None and not self._geometry_problem:
            from bench.model.geometry import builtin_geometry, geometry_for_profile

            name = geometry_for_profile(self.profile.name)
            if name is None:
                self._geometry_problem = (
                    f"no built-in geometry for the {self.profile.name}; give one with --geometry FILE "
                    "(bench model predict explains the format)"
                )
            else:
                self.geometry = builtin_geometry(name)
        return self.geometry

    def _fill_model_view(self, view: ModelScreen) -> None:
        """Show the latest report; ask for a refit when captures came since it was made."""
        stale = self._model_shown_generation != self._model_generation
        if self._model_geometry() is not None and stale and self._model_due_s is None:
            self._model_due_s = time.monotonic()  # just opened: refit at once
        busy = self._model_busy or self._model_due_s is not None
        view.show(self.model_report, self._geometry_problem, busy)

    def _start_model_fit(self) -> None:
        """Refit the model to the captures so far, in a worker thread (about a second: never on
        the screen's thread, never on the engine's)."""
        self._model_due_s = None
        geometry = self._model_geometry()
        workflow = self.workflow
        if geometry is None or workflow is None:
            return
        captures = list(workflow.captures())
        generation = self._model_generation
        settings = getattr(self, "settings", None)
        rh = settings.rh_percent if settings is not None else None
        self._model_busy = True

        def fit() -> None:  # worker thread
            from bench.model.live import ModelReport, model_report

            try:
                report = model_report(geometry, captures, default_rh=60.0 if rh is None else rh)
            except Exception as exc:  # noqa: BLE001 - a fault of the model must not leave the view waiting
                report = ModelReport(geometry.title, len(captures), problem=f"the fit failed: {exc}")
            self.post_message(self.ModelRefreshed(report, generation))

        self.run_worker(fit, thread=True, group="model", name="model fit", exit_on_error=False)

    def on_bench_app_model_refreshed(self, message: ModelRefreshed) -> None:
        self._model_busy = False
        self.model_report = message.report
        self._model_shown_generation = message.generation
        top = self._top_screen()
        if isinstance(top, ModelScreen):
            if message.generation != self._model_generation and self._model_due_s is None:
                self._model_due_s = time.monotonic() + MODEL_DEBOUNCE_S  # captures came meanwhile
            self._fill_model_view(top)

    def _refresh_blowing(self, view: WorkflowView) -> None:
        if self.workflow is None:
            return
        plot = _find(view, BlowingPlot)
        if plot is None or not plot.display:
            return
        plot.curve = self.workflow.blowing_curve()
        plot.last_break = self.workflow.last_break()

    def _refresh_chart_blowing_line(self, view: ChartScreen) -> None:
        if self.workflow is None:
            return
        curve = self.workflow.blowing_curve()
        if curve is None:
            text = "blowing curve: none yet (w shows it as you play a crescendo)"
        elif shown_slope(curve) is None:
            text = (
                f"blowing curve {curve.note}: level steady ({max(curve.level_range_db, 0.0):.1f} dB span),"
                f" no slope yet; w shows the curve"
            )
        else:
            text = curve.describe()
        label = _find(view, "#chart-blowing")
        if label is not None and text != self._blowing_line:
            self._blowing_line = text
            label.update(text)

    def action_capture(self) -> None:
        self._tell(self.session.capture())
        self._refresh_session()

    # -- reference tone --------------------------------------------------------------------------

    def _tone_from_thread(self, notice: Notice) -> None:
        """The controller's ``on_tone``: called from the thread that opened the output."""
        self.post_message(self.ToneReported(notice))

    def on_bench_app_tone_reported(self, message: ToneReported) -> None:
        self._tell(message.notice)
        self._refresh_session()

    def action_tone(self) -> None:
        self._tell(self.session.toggle_tone())
        self._refresh_session()

    def action_tone_voice(self) -> None:
        self._tell(self.session.next_tone_timbre())

    def action_tone_level(self, steps: int) -> None:
        self._tell(self.session.step_tone_level(steps))
        self._refresh_session()

    def action_auto_capture(self) -> None:
        self._tell(self.session.toggle_auto())
        self._show_workflow()

    def action_type_label(self) -> None:
        self.push_screen(
            ValueDialog(
                "Label for the next captures",
                self.session.label,
                f"what was done, e.g. after undercutting hole 3 ({LABEL_MAX_CHARS} characters at most)",
            ),
            self.apply_typed_label,
        )

    def apply_typed_label(self, text: str | None) -> None:
        """Put a typed label on the next captures; a label too long is refused in one line."""
        self._tell(self.session.type_label(text))
        self._show_workflow()

    def _switch_view(self, kind: type[WorkflowView] | None) -> None:
        """Show the live screen (None) or a workflow view, from the live screen or another view."""
        top = self._top_screen()
        if top is not self._main_screen and not isinstance(top, WorkflowView):
            return  # a dialog or the key guide is open: it keeps the keys
        if isinstance(top, WorkflowView):
            self.pop_screen()
            if isinstance(top, kind or ()):  # the same key again: back to live
                return
        if kind is not None:
            name = {ChartScreen: "chart", BlowingScreen: "blowing", ModelScreen: "model"}[kind]
            if not self.is_screen_installed(name):
                self.install_screen(kind(), name=name)
            self.push_screen(name)

    def action_chart_view(self) -> None:
        self._switch_view(ChartScreen)

    def action_blowing_view(self) -> None:
        self._switch_view(BlowingScreen)

    def action_model_view(self) -> None:
        self._switch_view(ModelScreen)

    def action_live_view(self) -> None:
        self._switch_view(None)

    def key_rows(self) -> list[tuple[str, str]]:
        """(keys, description) of every binding of the screen, as the key guide lists them."""
        bindings = list(Binding.make_bindings(self.BINDINGS))
        bindings.append(
            Binding(
                self.COMMAND_PALETTE_BINDING,
                "command_palette",
                "commands",
                tooltip="Command list: every action by name (type to search)",
            )
        )
        return binding_rows(bindings, self.get_key_display)

    def action_guide(self) -> None:
        self.push_screen(KeyGuide(self.key_rows()))

    def palette_entries(self) -> Iterator[tuple[str, Callable[[], Any], str]]:
        """(name, callback, help) of every command-list entry."""
        for control in CONTROLS:
            yield control.description, self._runner(control.action), _keys_hint(control.keys)
        for tid in TEMPERAMENT_IDS:
            t = get_temperament(tid)
            yield f"Temperament: {t.name}", self._runner(f"set_temperament('{tid}')"), t.description
        flats = self.engine.settings.flats
        for pc in range(12):
            name = pitch_class_name(pc, flats=flats)
            yield f"Tonic: {name}", self._runner(f"set_tonic('{name}')"), "tonic of the temperament"
        for std in PITCH_STANDARDS:
            yield (
                f"Pitch standard: {std.name}",
                self._runner(f"set_a4({std.a4_hz})"),
                f"A4 = {std.a4_hz:g} Hz",
            )

    def _runner(self, action: str) -> Callable[[], Any]:
        return lambda: self.run_action(action)

    def action_set_temperament(self, temperament_id: str) -> None:
        self.change_settings(temperament=temperament_id)

    def action_set_tonic(self, tonic: str) -> None:
        self.change_settings(tonic=tonic)

    def action_set_a4(self, a4_hz: float) -> None:
        self.change_settings(a4_hz=check_a4(a4_hz))


def _cents_words(cents: float, *, short: bool = False) -> str:
    """``+3.2 c sharp`` / ``-7.0 c flat`` / ``+0.4 c on target`` (``short``: ``+3 c``)."""
    side = offset_side(cents)
    if short:
        return f"{round(cents):+d} c"
    words = {"flat": "flat", "sharp": "sharp", "centred": "on target"}.get(side, "")
    return f"{cents:+.1f} c {words}".rstrip()


def _find(view: Any, selector: Any) -> Any:
    """``view.query_one(selector)``, or None while the view is not composed yet."""
    try:
        return view.query_one(selector)
    except NoMatches:
        return None


def _keys_hint(keys: str) -> str:
    """Key names for the command list, e.g. "key: t"."""
    return "key: " + " / ".join(k.replace("_", " ") for k in keys.split(","))


def run_app(
    engine: Engine | Callable[..., Engine],
    *,
    log_dir: Path | None = None,
    notice: str | None = None,
    events: EventRelay | None = None,
    settings_path: Path | None = None,
    remember: bool = True,
    poll_hz: float = POLL_HZ,
    temp_follower: AirTemperatureFollower | None = None,
    profile: InstrumentProfile | str | None = None,
    label: str = "",
    tone_note: str | None = None,
    tone_level_dbfs: float | None = None,
    geometry: Geometry | None = None,
) -> int:
    """Show the bench screen until the user quits; start and stop the engine.

    Parameters
    ----------
    engine : Engine or callable
        Either a built, not yet started :class:`bench.engine.Engine`, or a factory
        ``engine(on_event=callback) -> Engine``. The app must hear the engine's events;
        three ways, pick one:

        - pass a factory: it is called with ``on_event`` connected to the app;
        - build the engine with ``on_event=relay`` for an :class:`EventRelay` and pass
          ``events=relay``;
        - pass an engine whose ``on_event`` is a settable attribute (as
          :class:`bench.engine.Engine`'s is) or that has ``set_event_handler(callback)``:
          the app sets it on mount and clears it on unmount.

        An engine already started is fine (``start()`` is then a no-op).
    log_dir : Path, optional
        Folder for session logs started with the log key; the default folder if None.
    notice : str, optional
        One line to show when the screen opens.
    events : EventRelay, optional
        See ``engine``.
    settings_path : Path, optional
        Where changed settings are remembered (``bench.config.save_settings``); its
        default place if None.
    remember : bool
        Save settings changes.
    poll_hz : float > 0
        Screen updates per second.
    temp_follower : object, optional
        See :class:`BenchApp`.
    profile : InstrumentProfile or str, optional
        Instrument of the session (built-in name or ``.toml`` file); the alto if None.
    label : str
        Label of the first captures.
    tone_note : str, optional
        Sound the reference tone from the start on this note (``--drone``).
    tone_level_dbfs : float, optional
        Its peak level, dBFS (``--drone-level-db``).
    geometry : Geometry, optional
        The instrument's geometry for the model view (see :class:`BenchApp`).

    Returns
    -------
    int
        Exit status: 0 after the user quits.

    Raises
    ------
    BenchError
        The engine could not start (e.g. ``DeviceError``); raised after the screen closes,
        so the command line can print it.
    """
    if not isinstance(engine, Engine):  # a factory: connect it to the screen's relay
        events = EventRelay()
        engine = engine(on_event=events)
    app = BenchApp(
        engine,
        log_dir=log_dir,
        events=events,
        notice=notice,
        settings_path=settings_path,
        remember=remember,
        poll_hz=poll_hz,
        temp_follower=temp_follower,
        profile=profile,
        label=label,
        tone_note=tone_note,
        tone_level_dbfs=tone_level_dbfs,
        geometry=geometry,
    )
    try:
        code = app.run()
    finally:
        try:
            engine.stop()  # stopped already on unmount; a second stop is harmless
        except BenchError:
            pass
    if app.start_error is not None:
        raise app.start_error
    return int(code or 0)
