"""Output that survives a closed pipe: ``bench ... | head -2`` stops the printing, nothing else.

When the reader of standard output (or error) goes away, a write fails with EPIPE
(``BrokenPipeError``; Python ignores SIGPIPE). :func:`write_line` then points the stream's file
descriptor at ``/dev/null`` -- as the Python documentation's note on SIGPIPE advises -- so later
writes and the interpreter's final flush are silent, and reports that the reader is gone; the
caller goes on measuring and logging.
"""

from __future__ import annotations

import contextlib
import os
import sys
from typing import TextIO

__all__ = ["CLOSED_PIPE_STATUS", "silence", "write_line"]

CLOSED_PIPE_STATUS = 141
"""Exit status of a command whose output pipe closed: 128 + SIGPIPE (13), what a shell reports
for a program killed by SIGPIPE (POSIX shell ``$?`` convention)."""

_silenced: set[int] = set()


def silence(stream: TextIO) -> None:
    """Point ``stream``'s file descriptor at /dev/null (once); later writes go nowhere."""
    try:
        fd = stream.fileno()
    except (OSError, ValueError):
        return
    if fd in _silenced:
        return
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, fd)
    finally:
        os.close(devnull)
    _silenced.add(fd)


def write_line(text: str, stream: TextIO | None = None) -> bool:
    """Print ``text`` and a newline, flushed; False (and the stream silenced) when its reader
    has gone away."""
    out = sys.stdout if stream is None else stream
    try:
        out.write(text + "\n")
        out.flush()
    except BrokenPipeError:
        silence(out)
        with contextlib.suppress(OSError, ValueError):
            out.flush()
        return False
    except ValueError:  # the stream was closed by the program
        return False
    return True
