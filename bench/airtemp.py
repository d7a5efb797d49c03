"""Air temperature from outside bench, re-read every few seconds.

``--temp-source FILE`` reads the first number in a file a sensor logger rewrites;
``--temp-source cmd:COMMAND`` runs a command and reads the first number it prints. Either
way the value is degrees Celsius and replaces ``temp_c`` in the engine's settings.
"""

from __future__ import annotations

import re
import shlex
import threading
from collections.abc import Callable
from pathlib import Path
from typing import Any

from bench.errors import SettingsError
from bench.numbers import find_number
from bench.safeio import FileRefused, read_text_file, run_capped
from bench.textsafe import clip
from bench.tuning.air import TEMP_MAX_C, TEMP_MIN_C

READ_LIMIT_BYTES = 4096
"""Most bytes read from a temperature file or command (a sensor prints a line or two)."""
TEMP_RANGE_C = (TEMP_MIN_C, TEMP_MAX_C)
"""Air temperatures accepted, degC (the tuning model's range)."""


_W1_MILLI = re.compile(r"\bt=(-?\d+)\b")


def parse_temp_c(text: str, origin: str) -> float:
    r"""The temperature in ``text``, degC: the first number, or a 1-wire sensor's reading.

    Linux's 1-wire thermometers (DS18B20) give millidegrees: ``w1_slave`` ends in
    ``t=23125`` and the newer ``temperature`` file holds ``23125`` alone; both read 23.125.
    A bare whole number above 1000 is taken as millidegrees (no room is that hot).

    >>> parse_temp_c("temp=23.4 C", "sensor")
    23.4
    >>> parse_temp_c("72 01 4b 46 7f ff 0e 10 57 : crc=57 YES\n72 01 4b 46 7f ff 0e 10 57 t=23125", "w1")
    23.125
    >>> parse_temp_c("23125\n", "w1 temperature")
    23.125

    Raises
    ------
    SettingsError
        No number, or one outside the accepted range (-10..45 degC).
    """
    w1 = _W1_MILLI.search(text)
    if w1 is not None:
        if "NO" in text.split("t=")[0].split():
            raise SettingsError(f"1-wire sensor in {origin} reports a bad CRC; keeping the last temperature")
        return _in_range(int(w1.group(1)) / 1000.0, origin)
    bare = text.strip()
    if bare.lstrip("-").isdigit() and abs(int(bare)) > 1000:
        return _in_range(int(bare) / 1000.0, origin)
    try:
        found = find_number(text)  # the one number syntax of bench: 2.35e1, U+2212 minus
    except SettingsError as exc:
        raise SettingsError(f"temperature from {origin}: {exc}; it should print degC") from None
    if found is None:
        raise SettingsError(f"no temperature in {origin} (read {clip(repr(text.strip()), 40)}); it should print degC")
    return _in_range(found[0], origin)


def _in_range(temp_c: float, origin: str) -> float:
    lo, hi = TEMP_RANGE_C
    if not lo <= temp_c <= hi:
        raise SettingsError(f"temperature {temp_c} degC from {origin} is outside {lo:.0f}..{hi:.0f} degC")
    return temp_c


class AirTemperatureSource:
    """Where the air temperature comes from: a file or a command.

    Parameters
    ----------
    spec : str
        A file path, or ``cmd:`` followed by a command line (run without a shell).
    timeout_s : float > 0, seconds
        Longest a command may take.
    """

    def __init__(self, spec: str, *, timeout_s: float = 3.0) -> None:
        spec = spec.strip()
        if not spec:
            raise SettingsError("empty --temp-source; give a file or cmd:COMMAND")
        self.spec = spec
        self.timeout_s = timeout_s
        if spec.startswith("cmd:"):
            self._argv: list[str] | None = shlex.split(spec[4:])
            if not self._argv:
                raise SettingsError("--temp-source cmd: names no command; give cmd:COMMAND")
            self._path: Path | None = None
        else:
            self._argv = None
            self._path = Path(spec)

    @property
    def origin(self) -> str:
        return f"command {clip(repr(self._argv[0]))}" if self._argv else f"file {clip(str(self._path))}"

    def read_temp_c(self) -> float:
        """Read the temperature now, degC.

        Raises
        ------
        SettingsError
            The file or command fails or gives no usable number.
        """
        if self._path is not None:
            try:  # a regular file only (a named pipe would block), at most READ_LIMIT_BYTES
                text = read_text_file(self._path, limit_bytes=READ_LIMIT_BYTES)
            except FileRefused as exc:
                raise SettingsError(f"cannot read temperature file {clip(str(self._path))}: {exc.reason}") from None
        else:
            assert self._argv is not None
            try:  # its own process group, killed whole at the timeout or past the cap
                done = run_capped(self._argv, timeout_s=self.timeout_s, limit_bytes=READ_LIMIT_BYTES)
            except FileRefused as exc:
                raise SettingsError(f"temperature {self.origin} {exc.reason}") from None
            if done.returncode != 0:
                raise SettingsError(f"temperature {self.origin} exited with status {done.returncode}")
            text = done.stdout
        return parse_temp_c(text, self.origin)


class AirTemperatureFollower:
    """Re-read the air temperature every ``interval_s`` and put it into the engine's settings.

    A failed read keeps the last value and is reported once through ``on_error`` until a
    read succeeds again.

    Parameters
    ----------
    source : AirTemperatureSource
    engine : object with ``settings`` and ``update_settings`` (a :class:`bench.engine.Engine`)
    interval_s : float > 0, seconds
    on_error : callable(str), optional
    """

    def __init__(
        self,
        source: AirTemperatureSource,
        engine: Any,
        *,
        interval_s: float = 5.0,
        on_error: Callable[[str], None] | None = None,
    ) -> None:
        self.source = source
        self.engine = engine
        self.interval_s = float(interval_s)
        self.on_error = on_error
        self.last_temp_c: float | None = None
        self._failing = False
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def update_once(self) -> float | None:
        """Read once and apply; the value read, or None when the read failed."""
        try:
            temp_c = self.source.read_temp_c()
        except SettingsError as exc:
            if not self._failing and self.on_error is not None:
                self.on_error(str(exc))
            self._failing = True
            return None
        self._failing = False
        self.last_temp_c = temp_c
        if self.engine.settings.temp_c != temp_c:
            self.engine.update_settings(temp_c=temp_c)  # atomic: a change on the screen is kept
        return temp_c

    def start(self) -> None:
        self._thread = threading.Thread(target=self._run, name="bench-airtemp", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set():
            self.update_once()
            self._stop.wait(self.interval_s)

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(self.source.timeout_s + 1.0)
