"""Reading and writing files the user named, without hanging, exhausting memory or destroying
anything.

* :func:`read_text_file` opens a path only when it is a regular file (a named pipe would block
  forever, ``/dev/zero`` never ends), reads at most a stated number of bytes, and decodes UTF-8
  with or without a byte order mark.
* :func:`check_audio_input` says in words why a path is no audio file before a decoder opens it.
* :func:`check_output` refuses an output that is one of the inputs, an existing file or a
  symbolic link (the last two unless the user asked to overwrite); :class:`ReplacingFile` and
  :func:`replace_file` write a temporary file beside the destination and rename it into place
  (POSIX ``rename(2)`` is atomic), so a crash leaves either the old file or the new one, and a
  rename replaces a link itself rather than writing through it.
* :func:`run_capped` runs a command in its own process group, reads at most a stated number of
  bytes of its output and kills the whole group at the timeout.
"""

from __future__ import annotations

import contextlib
import os
import select
import shutil
import signal
import stat
import subprocess
import tempfile
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import IO

__all__ = [
    "CommandResult",
    "FileRefused",
    "ReplacingFile",
    "check_audio_input",
    "check_output",
    "check_regular_file",
    "describe_kind",
    "read_text_file",
    "replace_file",
    "run_capped",
    "write_via_temp",
]

TEXT_LIMIT_BYTES = 1_000_000
"""Default size limit of a text or TOML input, bytes (a settings, temperament or profile file
holds a few hundred)."""


class FileRefused(Exception):
    """A path cannot be used; ``reason`` says why in a few words (no path, no advice)."""

    def __init__(self, reason: str, *, missing: bool = False) -> None:
        super().__init__(reason)
        self.reason = reason
        self.missing = missing


def describe_kind(mode: int) -> str:
    """Words for the kind of a file that is not a regular file (from ``st_mode``)."""
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode):
        return "a character device"
    if stat.S_ISBLK(mode):
        return "a block device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _os_reason(exc: OSError) -> FileRefused:
    if isinstance(exc, FileNotFoundError):
        return FileRefused("no such file", missing=True)
    if isinstance(exc, PermissionError):
        return FileRefused("permission denied")
    if isinstance(exc, IsADirectoryError):
        return FileRefused("it is a folder, not a file")
    return FileRefused(exc.strerror or type(exc).__name__)


def read_text_file(path: str | os.PathLike[str], *, limit_bytes: int = TEXT_LIMIT_BYTES) -> str:
    """The text of a regular file of at most ``limit_bytes`` bytes, UTF-8 (a BOM is dropped).

    The file is opened without blocking (``O_NONBLOCK``), so a named pipe with no writer does
    not hang, and refused unless ``fstat`` shows a regular file.

    Raises
    ------
    FileRefused
        Missing, not a regular file, unreadable, larger than the limit, or not UTF-8.
    """
    try:
        fd = os.open(os.fspath(path), os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise _os_reason(exc) from None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            raise FileRefused(f"it is {describe_kind(info.st_mode)}, not a regular file")
        if info.st_size > limit_bytes:
            raise FileRefused(f"it holds {info.st_size} bytes, more than the {limit_bytes} a file of this kind may")
        chunks: list[bytes] = []
        total = 0
        while True:
            chunk = os.read(fd, min(65536, limit_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > limit_bytes:
                raise FileRefused(f"it grew past the {limit_bytes} bytes a file of this kind may hold")
    except OSError as exc:
        raise _os_reason(exc) from None
    finally:
        os.close(fd)
    try:
        return b"".join(chunks).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise FileRefused(f"it is not UTF-8 text (byte {exc.start})") from None


def check_regular_file(path: str | os.PathLike[str]) -> None:
    """Refuse, in words, a path that cannot be read as a file: missing, not a regular file
    (a named pipe, a device, a folder), or not readable.

    Raises
    ------
    FileRefused
    """
    try:
        info = os.stat(path)
    except OSError as exc:
        raise _os_reason(exc) from None
    if not stat.S_ISREG(info.st_mode):
        raise FileRefused(f"it is {describe_kind(info.st_mode)}, not a regular file")
    try:
        fd = os.open(os.fspath(path), os.O_RDONLY | os.O_NONBLOCK)
    except OSError as exc:
        raise _os_reason(exc) from None
    os.close(fd)


check_audio_input = check_regular_file
"""An audio input must be a regular, readable file (the words are the same)."""


def _same_file(a: os.stat_result, b: os.stat_result) -> bool:
    return (a.st_dev, a.st_ino) == (b.st_dev, b.st_ino)


def check_output(
    path: str | os.PathLike[str], *, inputs: Iterable[str | os.PathLike[str]] = (), overwrite: bool = False
) -> None:
    """Refuse an output path that would destroy something the user did not ask to replace.

    Always refused: one of ``inputs`` (also through a link or another name of the same file),
    and anything that exists but is not a regular file or a link. Refused unless
    ``overwrite``: an existing file and a symbolic link (with ``overwrite`` the link itself is
    replaced, never the file it points to; see :class:`ReplacingFile`).

    Raises
    ------
    FileRefused
    """
    target = os.fspath(path)
    with contextlib.suppress(OSError):
        out_info = os.stat(target)  # follows a link: the file it would have reached
        for item in inputs:
            with contextlib.suppress(OSError):
                if _same_file(out_info, os.stat(item)):
                    raise FileRefused(f"it is the input {os.fspath(item)}; give another name")
    try:
        info = os.lstat(target)
    except FileNotFoundError:
        return
    except OSError as exc:
        raise _os_reason(exc) from None
    if stat.S_ISLNK(info.st_mode):
        if not overwrite:
            raise FileRefused("it is a symbolic link; give another name, or --overwrite to replace the link itself")
        return
    if not stat.S_ISREG(info.st_mode):
        raise FileRefused(f"it is {describe_kind(info.st_mode)}; give the name of a file")
    if not overwrite:
        raise FileRefused("it exists already; give a new name, or --overwrite to replace it")


class ReplacingFile:
    """A text file written beside ``path`` and renamed onto it by :meth:`commit`.

    ``path`` itself is replaced (a link there is replaced by the file, its target is left
    alone); :meth:`discard` removes the temporary file and leaves ``path`` as it was.

    Raises
    ------
    OSError
        The folder cannot be written.
    """

    def __init__(self, path: str | os.PathLike[str], *, newline: str | None = None) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{self.path.name}.", suffix=".tmp", dir=self.path.parent)
        self._tmp = Path(tmp)
        self.file: IO[str] = os.fdopen(fd, "w", encoding="utf-8", newline=newline)
        self._done = False

    def commit(self, *, mode_from: Path | None = None) -> None:
        """Close and rename onto ``path`` (with the permissions of ``mode_from`` when given)."""
        if self._done:
            return
        self._done = True
        try:
            self.file.flush()
            os.fsync(self.file.fileno())
            self.file.close()
            if mode_from is not None:
                with contextlib.suppress(OSError):
                    shutil.copymode(mode_from, self._tmp)
            os.replace(self._tmp, self.path)
        except BaseException:
            with contextlib.suppress(OSError):
                self.file.close()
            with contextlib.suppress(OSError):
                self._tmp.unlink()
            raise

    def discard(self) -> None:
        """Remove the temporary file; ``path`` stays as it was."""
        if self._done:
            return
        self._done = True
        with contextlib.suppress(OSError):
            self.file.close()
        with contextlib.suppress(OSError):
            self._tmp.unlink()


def replace_file(path: str | os.PathLike[str], text: str, *, follow_link: bool = False) -> Path:
    """Write ``text`` to ``path`` through a temporary file and a rename; returns the file written.

    With ``follow_link`` a symbolic link at ``path`` stays a link and the file it points to is
    replaced (the settings file a user keeps elsewhere); without it the link itself is replaced.
    """
    dest = Path(os.path.realpath(path)) if follow_link else Path(path)
    out = ReplacingFile(dest)
    try:
        out.file.write(text)
    except BaseException:
        out.discard()
        raise
    out.commit(mode_from=dest if dest.exists() else None)
    return dest


def write_via_temp(path: str | os.PathLike[str], write: Callable[[Path], object]) -> Path:
    """Let ``write`` make a file at a temporary path beside ``path`` (same suffix), then
    rename it onto ``path``; on any failure the temporary file goes and ``path`` is untouched.
    For writers that take a path (plot libraries, CSV writers of other modules)."""
    dest = Path(path)
    dest.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{dest.stem}.", suffix=dest.suffix, dir=dest.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        write(tmp)
        os.replace(tmp, dest)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise
    return dest


@dataclass(frozen=True, slots=True)
class CommandResult:
    """What a command printed (at most the cap, decoded as UTF-8) and its exit status."""

    returncode: int
    stdout: str


def _kill_group(proc: subprocess.Popen[bytes]) -> None:
    with contextlib.suppress(ProcessLookupError, PermissionError):
        os.killpg(proc.pid, signal.SIGKILL)
    with contextlib.suppress(subprocess.TimeoutExpired):
        proc.wait(timeout=2.0)


def run_capped(argv: Sequence[str], *, timeout_s: float, limit_bytes: int = 4096) -> CommandResult:
    """Run ``argv`` (no shell) and read its standard output, bounded in time and size.

    The command runs in a new session (its own process group); at the timeout, or when it
    prints more than ``limit_bytes``, the whole group is killed with SIGKILL, and so is any
    process of the group left behind when the command itself ends.

    Raises
    ------
    FileRefused
        The command cannot start, overruns the timeout, or prints more than the cap.
    """
    deadline = time.monotonic() + timeout_s
    try:
        proc = subprocess.Popen(
            list(argv), stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
            start_new_session=True,
        )
    except OSError as exc:
        raise FileRefused(f"cannot start: {exc.strerror or exc}") from None
    assert proc.stdout is not None
    fd = proc.stdout.fileno()
    chunks: list[bytes] = []
    total = 0
    try:
        while True:
            left_s = deadline - time.monotonic()
            if left_s <= 0:
                raise FileRefused(f"gave no answer within {timeout_s:g} s; it was stopped")
            ready, _, _ = select.select([fd], [], [], left_s)
            if not ready:
                continue
            chunk = os.read(fd, 65536)
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > limit_bytes:
                raise FileRefused(f"printed more than {limit_bytes} bytes; it was stopped")
        try:
            returncode = proc.wait(timeout=max(deadline - time.monotonic(), 0.001))
        except subprocess.TimeoutExpired:
            raise FileRefused(f"did not end within {timeout_s:g} s; it was stopped") from None
    finally:
        _kill_group(proc)
        proc.stdout.close()
    return CommandResult(returncode, b"".join(chunks).decode("utf-8", errors="replace"))
