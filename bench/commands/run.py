"""``bench run`` (also plain ``bench``) and ``bench demo``: the live tuner.

With the screen (default) the engine runs behind ``bench.ui.app.run_app``. With
``--no-ui`` it logs unattended: one line per held note on stdout (note, duration, median
cents, register events), the frame log on disk, and Ctrl-C leaves a complete log.
"""

from __future__ import annotations

import argparse
import queue
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from bench.commands.options import add_tuning_options, settings_from_args
from bench.errors import (
    AudioFileError,
    BenchError,
    DeviceError,
    LogError,
    SettingsError,
)
from bench.tuning import TuningSettings

if TYPE_CHECKING:
    from bench.airtemp import AirTemperatureFollower
    from bench.engine import Engine, EngineEvent
    from bench.sources.base import AudioSource

INPUT_HELP = "mic (default for run), demo (the built-in instrument), or an audio FILE"
TEMP_INTERVAL_S = 5.0
"""Seconds between re-reads of --temp-source."""


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    for name, default_input, help_text in (
        ("run", "mic", "live tuner and register monitor (the default command)"),
        ("demo", "demo", "the live tuner listening to the built-in demo instrument"),
    ):
        p = sub.add_parser(
            name,
            help=help_text,
            description=(
                f"{help_text[0].upper()}{help_text[1:]}. Measures pitch, register and harmonics of "
                "what the input plays against the tuning in force. --no-ui logs unattended."
            ),
        )
        src = p.add_argument_group("input")
        src.add_argument("--input", default=default_input, metavar="mic|demo|FILE", help=INPUT_HELP)
        src.add_argument("--device", default=None, metavar="INDEX|NAME", help="input device: index or part of its name (see 'bench devices')")
        src.add_argument("--rate", default=None, metavar="HZ", help="sample rate of the microphone or demo, Hz (default: the device's)")
        src.add_argument("--block", default=None, metavar="N", help="samples per input block (default 512)")
        src.add_argument("--drone", default=None, metavar="NOTE",
                         help="sound NOTE's target through the default output from the start (see 'bench tone')")  # fmt: skip
        src.add_argument("--drone-level-db", default=None, metavar="DBFS",
                         help="peak level of the drone, dBFS (default -18; the . and , keys change it)")  # fmt: skip
        src.add_argument("--clock-ppm", default=None, metavar="PPM",
                         help="the input's clock error, ppm (default: what 'bench calibrate' stored for the device)")  # fmt: skip
        log = p.add_argument_group("session log")
        where = log.add_mutually_exclusive_group()
        where.add_argument("--log", default=None, type=Path, metavar="FILE", help="write the frame log to FILE (must not exist)")
        where.add_argument("--log-dir", default=None, type=Path, metavar="DIR", help="write a timestamped frame log in DIR")
        log.add_argument("--log-rate", default=None, metavar="N", help="rows a second in the log (default: every frame)")
        un = p.add_argument_group("unattended")
        un.add_argument("--no-ui", action="store_true", help="no screen: print held notes, write the log")
        un.add_argument("--duration", default=None, metavar="S", help="with --no-ui: stop after S seconds of input")
        p.add_argument(
            "--temp-source",
            default=None,
            metavar="FILE|cmd:COMMAND",
            help=f"re-read the air temperature (degC) from FILE or a command every {TEMP_INTERVAL_S:g} s",
        )
        work = p.add_argument_group("session workflow (captures; beside the log with --no-ui)")
        work.add_argument(
            "--profile", default=None, metavar="NAME|FILE",
            help="instrument: sopranino, soprano, alto (default), tenor, bass, ... or a .toml profile",
        )
        work.add_argument("--label", default="", metavar="TEXT", help="label of the first captures, e.g. 'as made'")
        work.add_argument(
            "--geometry", default=None, metavar="FILE|NAME",
            help="the instrument's geometry for the model view (key m): a geometry .toml or a built-in "
            "(wren-alto, wren-soprano); default: the profile's built-in geometry",
        )
        add_tuning_options(p)
        p.set_defaults(func=run_command)


def _positive(option: str, text: str | None, what: str, *, integer: bool = False) -> float | None:
    if text is None:
        return None
    from bench.numbers import parse_number
    from bench.textsafe import clip

    value = parse_number(text, option, what)  # the one number syntax of bench
    if integer and value != int(value):
        raise SettingsError(f"{option} {clip(repr(text))} is not a whole number; give {what}")
    if not value > 0:
        raise SettingsError(f"{option} {clip(repr(text))} must be above 0; give {what}")
    return int(value) if integer else value


def _say(message: str) -> None:
    from bench.pipes import write_line

    write_line(message, sys.stderr)  # a closed stderr stops the messages, not the run


def build_source(args: argparse.Namespace, *, realtime_file: bool) -> tuple[AudioSource, str | None]:
    """The source ``--input`` names, and a one-line notice when a missing microphone made
    it fall back to the demo instrument (None otherwise)."""
    from bench.sources.base import DEFAULT_BLOCK_SIZE

    block = int(_positive("--block", args.block, "samples per block, e.g. 512", integer=True) or DEFAULT_BLOCK_SIZE)
    if not 16 <= block <= 16384:
        raise SettingsError(f"--block {block} is out of range; use 16-16384 samples")
    rate = _positive("--rate", args.rate, "a sample rate in Hz, e.g. 48000", integer=True)
    if rate is not None and not 16000 <= rate <= 96000:  # what dsp.analyser takes
        raise SettingsError(f"--rate {int(rate)} Hz is out of range; use 16000-96000 (e.g. 48000)")
    rate_i = int(rate) if rate is not None else None
    kind = str(args.input)
    if kind == "demo":
        from bench.sources.demo import DemoSource

        return DemoSource(rate_i or 48000, block_size=block, profile=args.profile), None  # each profile its own instrument
    if kind == "mic":
        from bench.sources.mic import MicSource, resolve_input_device

        try:
            resolve_input_device(args.device)
        except DeviceError as exc:
            if args.device is not None:
                raise
            from bench.sources.demo import DemoSource

            demo = DemoSource(rate_i or 48000, block_size=block, profile=args.profile)
            return demo, f"{exc}; playing the demo instrument instead"
        return MicSource(args.device, sample_rate=rate_i, block_size=block), None
    if args.device is not None:
        raise SettingsError(f"--device {args.device!r} applies to --input mic, not to the file {kind}")
    if rate_i is not None:
        raise SettingsError(f"--rate {rate_i} applies to mic and demo; the file {kind} plays at its own rate")
    from bench.safeio import FileRefused, check_audio_input
    from bench.sources.wavfile import WavFileSource
    from bench.textsafe import clip

    try:  # a named pipe would block the decoder for ever, a device never ends
        check_audio_input(kind)
    except FileRefused as exc:
        if exc.missing:  # the source's own words name the missing file
            return WavFileSource(Path(kind), block_size=block, realtime=realtime_file), None
        raise AudioFileError(f"--input {clip(kind)} cannot be played: {exc.reason}; give mic, demo or an audio file") from None
    return WavFileSource(Path(kind), block_size=block, realtime=realtime_file), None


def _log_file(args: argparse.Namespace) -> Path | None:
    from bench.config import default_log_dir
    from bench.framelog import new_log_path

    if args.log is not None:
        path = Path(args.log)
        if path.exists():
            raise LogError(f"log file {path} exists already; give a new name or use --log-dir")
        return path
    if args.log_dir is not None:
        folder = Path(args.log_dir)
        if folder.exists() and not folder.is_dir():
            raise LogError(f"--log-dir {folder} is a file; give a folder")
        return new_log_path(folder)
    if args.no_ui:
        return new_log_path(default_log_dir())
    return None


def run_command(args: argparse.Namespace) -> int:
    from bench.config import read_saved_settings

    duration_s = _positive("--duration", args.duration, "seconds of input, e.g. 600")
    if duration_s is not None and not args.no_ui:
        raise SettingsError("--duration applies to --no-ui runs; add --no-ui or leave it out")
    log_rate = _positive("--log-rate", args.log_rate, "rows a second, e.g. 20")
    if args.profile is not None:
        from bench.workflow.profiles import get_profile

        args.profile = get_profile(args.profile)  # a bad name or file: one line, before any input opens
    if args.geometry is not None:
        if args.no_ui:
            raise SettingsError("--geometry applies to the screen's model view; leave it out with --no-ui "
                                "(bench model fit GEOMETRY CAPTURES fits a session's captures afterwards)")
        from bench.model.geometry import load_geometry

        args.geometry = load_geometry(args.geometry)  # a bad file: one line, before the screen opens
    saved = read_saved_settings()
    for warning in saved.problems:  # said in the terminal, and on the screen's notice line below
        _say(f"warning: {warning}")
    base: TuningSettings | None = saved.settings
    if not args.no_ui and not (saved.from_file or saved.settings.custom_temperament):
        base = None
    settings = settings_from_args(args, base)
    if args.temp_source is not None:
        from bench.airtemp import AirTemperatureSource

        temp_source = AirTemperatureSource(args.temp_source)
        settings = settings_from_args(argparse.Namespace(temp=temp_source.read_temp_c()), settings)
    source, notice = build_source(args, realtime_file=not args.no_ui)
    args.clock_ppm = _clock_ppm(args, source)
    log_path = _log_file(args)
    if args.drone is not None:
        from bench.tuning.notes import parse_note

        parse_note(args.drone)  # a bad name: one line, before any output opens
    from bench.numbers import parse_bounded

    args.drone_level_db = parse_bounded("--drone-level-db", args.drone_level_db, "a peak level in dBFS, e.g. -18", -80.0, 0.0)
    if args.no_ui:
        from bench import unattended

        if notice:  # unattended, the input asked for is the input used, or the run fails
            _say(f"error: {unattended.without_fallback(notice)}")
            return unattended.EXIT_INPUT
        problem = unattended.log_folder_problem(log_path)
        if problem is not None:
            _say(f"error: {problem}")
            return unattended.EXIT_LOG
    if args.no_ui:
        origins = unattended.setting_origins(args, saved.from_file, saved.path)
        _say(unattended.describe_origins(settings, origins, args.label))
        return _run_unattended(args, source, settings, log_path, log_rate, duration_s, origins)
    if saved.problems:
        notice = "; ".join([*saved.problems, *([notice] if notice else [])])
    return _run_screen(args, source, settings, log_path, log_rate, notice)


def _start_drone(note: str | None, settings: TuningSettings, level_dbfs: float | None = None) -> Any:
    """``--drone NOTE`` without the screen: the session's reference tone (:class:`bench.reftone.ReferenceTone`,
    as the screen's controller owns it) on NOTE while none is locked; None without a note or
    without an output (said in one line: the run goes on without the drone)."""
    if note is None:
        return None
    from bench.reftone import ReferenceTone
    from bench.tuning.notes import parse_note

    def report(text: str, severity: str) -> None:
        _say(f"warning: {text}" if severity == "error" else text)

    tone = ReferenceTone(settings, report=report, background=False)  # opened before the input
    if level_dbfs is not None:
        tone.level_dbfs = level_dbfs
    tone.start(parse_note(note))
    if not tone.on:
        return None
    state = tone.state
    _say(f"drone: {state.note} {state.freq_hz or 0.0:.4f} Hz; automatic captures wait while it sounds")
    return tone


def _clock_ppm(args: argparse.Namespace, source: Any) -> float | None:
    """--clock-ppm, or for a microphone the value stored for its device; None for none."""
    from bench.clockfile import find_calibration, parse_clock_ppm

    given = parse_clock_ppm(args.clock_ppm)
    if given is not None and args.input == "demo":
        raise SettingsError("--clock-ppm applies to a microphone or a recording, not to the demo instrument")
    from bench.sources.mic import MicSource, resolve_input_device

    if given is not None or not isinstance(source, MicSource):
        return given
    try:
        device = resolve_input_device(source.device_spec)
    except DeviceError:
        return None
    stored = find_calibration(device.name, device.host_api)
    return stored.clock_ppm if stored is not None else None


def _start_follower(
    args: argparse.Namespace, engine: Engine, report: Callable[[str], None]
) -> AirTemperatureFollower | None:
    if args.temp_source is None:
        return None
    from bench.airtemp import AirTemperatureFollower, AirTemperatureSource

    follower = AirTemperatureFollower(
        AirTemperatureSource(args.temp_source), engine, interval_s=TEMP_INTERVAL_S, on_error=report
    )
    follower.start()
    return follower


def _prepare_analyser() -> None:
    """Load (the first time after an install: compile) the analyser's kernels before anything starts.

    Compiling takes seconds once per installation: past one second a progress line on stderr
    counts the seconds (on a terminal; elsewhere one line says what is happening) and says when
    it is done, before the screen takes the terminal. Done before the screen starts, the
    loaded code is also among the start-up objects the screen keeps out of the garbage
    collector's full passes, instead of being walked by every one of them.
    """
    import threading

    from dsp.analyser import prepare_kernels

    what = "preparing the analyser (once after an install: about half a minute)"
    done = threading.Event()
    shown: list[float] = []
    t0_s = time.monotonic()

    def progress() -> None:
        if done.wait(1.0):
            return
        live = sys.stderr.isatty()
        if not live:
            _say(what)
        while not done.is_set():
            elapsed_s = time.monotonic() - t0_s
            shown.append(elapsed_s)
            if live:
                sys.stderr.write(f"\r{what}: {elapsed_s:4.0f} s")
                sys.stderr.flush()
            done.wait(1.0)

    ticker = threading.Thread(target=progress, name="bench-prepare", daemon=True)
    ticker.start()
    try:
        prepare_kernels()
    finally:
        done.set()
        ticker.join(2.0)
        if shown:
            end = "\r" if sys.stderr.isatty() else ""
            _say(f"{end}analyser ready after {time.monotonic() - t0_s:.0f} s" + " " * 30)


def _start_engine(
    make: Callable[[AudioSource], Engine], source: AudioSource, args: argparse.Namespace
) -> tuple[Engine, str | None]:
    """Build and start the engine; an unusable default microphone falls back to the demo.

    Returns the engine and a one-line notice when it fell back (None otherwise).
    """
    engine = make(source)
    try:
        engine.start()
    except DeviceError as exc:
        if args.input != "mic" or args.device is not None or args.no_ui:
            raise
        from bench.sources.demo import DemoSource

        engine = make(DemoSource(source.sample_rate, block_size=source.block_size, profile=args.profile))
        engine.start()
        return engine, f"{exc}; playing the demo instrument instead"
    return engine, None


def _run_screen(
    args: argparse.Namespace,
    source: AudioSource,
    settings: TuningSettings,
    log_path: Path | None,
    log_rate: float | None,
    notice: str | None,
) -> int:
    from bench.config import default_log_dir
    from bench.engine import Engine

    try:
        from bench.ui.app import run_app
    except ModuleNotFoundError as exc:
        if exc.name and exc.name.startswith("bench.ui"):
            raise BenchError("the screen is not installed in this build; use --no-ui") from None
        raise
    _prepare_analyser()
    # Started here so a device that cannot open is one line before the screen appears;
    # the app connects its event handler through the settable ``on_event``.
    engine, fallback = _start_engine(
        lambda src: Engine(src, settings, log_path=log_path, log_rows_per_s=log_rate, clock_ppm=args.clock_ppm),
        source,
        args,
    )
    notice = fallback or notice
    follower = _start_follower(args, engine, lambda message: _tell_screen(engine, f"air temperature: {message}"))
    try:
        result = run_app(
            engine,
            log_dir=args.log_dir or default_log_dir(),
            temp_follower=follower,
            notice=notice,
            profile=args.profile,
            label=args.label,
            tone_note=args.drone,  # the controller sounds it, as the tone key does
            tone_level_dbfs=args.drone_level_db,
            geometry=args.geometry,
        )
    finally:
        if follower is not None:
            follower.stop()
        engine.stop()
    return int(result) if isinstance(result, int) else 0


def _run_unattended(
    args: argparse.Namespace,
    source: AudioSource,
    settings: TuningSettings,
    log_path: Path | None,
    log_rate: float | None,
    duration_s: float | None,
    origins: dict[str, str] | None = None,
) -> int:
    from bench import unattended
    from bench.engine import Engine
    from bench.heldnotes import HeldNoteCollector
    from bench.pipes import write_line
    from bench.workflow.live import LiveWorkflow

    lines: queue.SimpleQueue[tuple[str, str]] = queue.SimpleQueue()
    # consumers of the engine's readings, fed on its thread: the held-note lines, and the
    # captures written beside the frame log (as on the screen)
    held_notes = HeldNoteCollector(on_note=lambda note: lines.put(("out", note.describe())))
    workflow = LiveWorkflow(profile=args.profile, log_path=None, label=args.label or "", clock_ppm=args.clock_ppm)
    drone = _start_drone(args.drone, settings, args.drone_level_db)  # its own output stream and callback
    if drone is not None:
        workflow.hold_auto(True)  # no capture is measured with the tone in it

    log_failed: list[str] = []

    def on_event(event: EngineEvent) -> None:  # engine thread
        if event.kind in ("jump", "weakening", "log_started"):
            return  # shown in the held-note lines / the first line
        if event.kind == "log_error":
            log_failed.append(event.message)
        lines.put(("err", f"{event.kind.replace('_', ' ')}: {event.message}"))

    def log_line(closing: bool = False) -> str:
        """How the log ended, for the last line; never names a file that was not written."""
        rows = engine.stats.log_rows
        if log_failed and log_path is not None:  # count what the file holds, not what was sent
            rows = unattended.rows_on_disk(log_path)
        if log_failed and rows == 0:
            return "no log written"
        if log_failed:
            return f"log: {log_path} ({rows} rows; stopped by a write error)"
        return f"the log is complete: {log_path} ({rows} rows)" if closing else f"log: {log_path} ({rows} rows)"

    stdout_open = [True]

    def drain() -> None:
        while True:
            try:
                where, text = lines.get_nowait()
            except queue.Empty:
                return
            if where == "out":
                if stdout_open[0]:  # a closed pipe (| head) stops the printing, not the run
                    stdout_open[0] = write_line(text)
            else:
                _say(text)

    try:
        engine, fallback = _start_engine(
            lambda src: Engine(
                src,
                settings,
                log_path=log_path,
                log_rows_per_s=log_rate,
                on_event=on_event,
                consumers=[held_notes, workflow, *([drone] if drone is not None else [])],
                clock_ppm=args.clock_ppm,
            ),
            source,
            args,
        )
    except DeviceError as exc:
        if drone is not None:
            drone.stop()
        _say(f"error: {exc}")
        return unattended.EXIT_INPUT
    record = (
        unattended.write_run_record(log_path, settings, origins or {}, args.label, engine.source.description)
        if log_path is not None
        else None
    )
    if log_path is not None and record is None:
        _say(f"warning: {unattended.run_record_path(log_path)} not written (exists or not writable)")
    if fallback:
        _say(fallback)
    follower = _start_follower(args, engine, lambda message: lines.put(("err", f"temperature: {message}")))
    clock = f"; clock {engine.clock_ppm:+.2f} ppm" if engine.clock_ppm is not None else ""
    _say(f"listening to {engine.source.description}{clock}; log {engine.log_path or 'off'}; Ctrl-C stops")
    wall0_s = time.monotonic()
    previous_term = _raise_on_sigterm()
    try:
        while engine.running:
            drain()
            if duration_s is not None:
                latest = engine.latest()
                heard_s = latest.stream_time_s if latest is not None else 0.0
                if max(heard_s, time.monotonic() - wall0_s if _is_live(engine) else 0.0) >= duration_s:
                    break
            time.sleep(0.02)
    except (KeyboardInterrupt, _Terminated) as exc:
        engine.stop()  # closes the consumers: the last held note and capture
        if follower is not None:
            follower.stop()
        drain()
        word = exc.word if isinstance(exc, _Terminated) else "interrupted"
        _say(f"{word}; {log_line(closing=True)}")
        return exc.status if isinstance(exc, _Terminated) else 130
    finally:
        _restore_sigterm(previous_term)
    engine.stop()  # closes the consumers: the last held note and capture
    if follower is not None:
        follower.stop()
    drain()
    stats = engine.stats
    captures = f"; {len(workflow.captures())} captures in {workflow.captures_path}" if workflow.captures_path else ""
    if workflow.file_error:
        captures = f"; captures not saved: {workflow.file_error}"
    _say(f"{stats.frames} frames, {stats.dropped_blocks} dropped blocks; {log_line()}{captures}")
    if stats.state == "error":
        return unattended.EXIT_INPUT
    return unattended.EXIT_LOG if log_failed else 0


class _Terminated(Exception):
    """SIGTERM or SIGHUP arrived: end like Ctrl-C (log complete and closed), exit status
    128 + the signal's number (143, 129)."""

    def __init__(self, signum: int) -> None:
        import signal

        super().__init__(signum)
        self.status = 128 + signum
        self.word = "hung up" if signum == getattr(signal, "SIGHUP", -1) else "terminated"


def _raise_on_sigterm() -> Any:
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None

    def handler(signum: int, frame: Any) -> None:
        raise _Terminated(signum)

    previous = {signal.SIGTERM: signal.signal(signal.SIGTERM, handler)}
    if hasattr(signal, "SIGHUP"):  # the terminal closed: the same orderly end
        previous[signal.SIGHUP] = signal.signal(signal.SIGHUP, handler)
    return previous


def _restore_sigterm(previous: Any) -> None:
    import signal

    for signum, handler in (previous or {}).items():
        signal.signal(signum, handler)


def _tell_screen(engine: Engine, message: str) -> None:
    """Pass a problem to the screen through the engine's event handler (set by the app)."""
    from bench.engine import EngineEvent

    handler = engine.on_event
    if handler is not None:
        latest = engine.latest()
        handler(EngineEvent("source_error", message, latest.stream_time_s if latest else 0.0))


def _is_live(engine: Engine) -> bool:
    """True for a microphone or a real-time paced source (wall time counts too)."""
    return engine.source.realtime

