"""Command line entry point: ``bench [run|demo|notes|temperaments|analyze|devices|calibrate|tone] ...``."""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from bench.errors import BenchError
from bench.pipes import CLOSED_PIPE_STATUS, silence
from bench.textsafe import one_line

# Each module exposes ``register(subparsers)``, which adds its sub-command and sets
# ``func(args) -> int`` as the parser default.
COMMAND_MODULES = (
    "bench.commands.run",  # run, demo
    "bench.commands.devices",
    "bench.commands.notes",  # notes, temperaments
    "bench.commands.analyze",
    "bench.commands.chart",  # chart, compare
    "bench.commands.model",  # model predict|fit|whatif|suggest
    "bench.commands.calibrate",
    "bench.commands.tone",
)
DEFAULT_COMMAND = "run"


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line error and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(2, f"error: {one_line(message)} (see '{self.prog} --help')\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="bench",
        description="Tuner and register monitor for recorders and other duct flutes.",
    )
    from bench import __version__

    parser.add_argument("--version", action="version", version=f"bench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name != name:  # a missing dependency is a real error
                raise
            continue  # command not built yet
        module.register(sub)
    return parser


def _with_default_command(argv: list[str], parser: argparse.ArgumentParser) -> list[str]:
    commands: set[str] = set()
    for action in parser._subparsers._group_actions if parser._subparsers else ():
        commands.update(getattr(action, "choices", {}) or {})
    if argv and (argv[0] in commands or argv[0] in ("-h", "--help", "--version")):
        return argv
    return [DEFAULT_COMMAND, *argv]


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    parser = build_parser()
    args_list = _with_default_command(list(sys.argv[1:] if argv is None else argv), parser)
    args = parser.parse_args(args_list)
    try:
        status = int(args.func(args) or 0)
        sys.stdout.flush()  # a closed pipe shows here when the output fitted in its buffer
        return status
    except BrokenPipeError:
        # The reader of the output went away (``bench notes | head -1``): stop quietly, as a
        # program killed by SIGPIPE would, and keep the final flush from complaining.
        silence(sys.stdout)
        return CLOSED_PIPE_STATUS
    except BenchError as exc:
        _say_error(f"error: {one_line(str(exc))}")
        return 2
    except KeyboardInterrupt:
        _say_error("interrupted")
        return 130


def _say_error(line: str) -> None:
    try:
        print(line, file=sys.stderr, flush=True)
    except BrokenPipeError:
        silence(sys.stderr)


if __name__ == "__main__":
    sys.exit(main())
