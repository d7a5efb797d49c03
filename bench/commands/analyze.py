"""``bench analyze FILE...``: frame logs and held-note summaries of recordings."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from bench.commands.options import add_tuning_options, settings_from_args
from bench.errors import AudioFileError, BenchError, SettingsError

AUDIO_SUFFIXES = {".wav", ".flac", ".ogg", ".oga", ".aif", ".aiff"}


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "analyze",
        help="analyse recordings: frame log (CSV) and a per-note summary",
        description="Analyse WAV/FLAC/OGG recordings (any channel count and rate). Prints each "
        "held note with its offset in cents and register events; --csv/--csv-dir write the "
        "frame log. A folder given as FILE is searched for audio files.",
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="audio files or folders")
    out = p.add_mutually_exclusive_group()
    out.add_argument("--csv", type=Path, metavar="PATH", help="frame log of the single input")
    out.add_argument("--csv-dir", type=Path, metavar="DIR", help="one <stem>.csv per input")
    p.add_argument("--overwrite", action="store_true",
                   help="replace an existing CSV (or a link of that name; never the file it points to)")
    p.add_argument("--lock", metavar="NOTE", help="judge every frame against this note, e.g. F4")
    p.add_argument("--clock-ppm", default=None, metavar="PPM",
                   help="clock error of the card that recorded the files, ppm (from 'bench calibrate')")  # fmt: skip
    add_tuning_options(p)
    p.set_defaults(func=run_analyze)


def _expand(items: list[str]) -> list[Path]:
    paths: list[Path] = []
    for item in items:
        path = Path(item)
        if path.is_dir():
            found = sorted(q for q in path.rglob("*") if q.suffix.lower() in AUDIO_SUFFIXES)
            if not found and len(items) > 1:  # one of several: say so rather than skip it
                from bench.textsafe import clip

                print(f"warning: no audio files in the folder {clip(str(path))}", file=sys.stderr)
            paths += found
        else:
            paths.append(path)
    return paths


def _check_outputs(args: argparse.Namespace, paths: list[Path]) -> None:
    """Refuse, before anything is analysed, a CSV that would replace an input, an existing
    file or a link (the last two unless --overwrite)."""
    from bench.safeio import FileRefused, check_output
    from bench.textsafe import clip

    outputs = [args.csv] if args.csv else [args.csv_dir / f"{p.stem}.csv" for p in paths] if args.csv_dir else []
    for out in outputs:
        try:
            check_output(out, inputs=paths, overwrite=args.overwrite)
        except FileRefused as exc:
            option = "--csv" if args.csv else "--csv-dir"
            raise SettingsError(f"{option}: will not write {clip(str(out))}: {exc.reason}") from None


def _input_problem(path: Path) -> str | None:
    """Why ``path`` is no audio file, in words (None: let the decoder judge it)."""
    from bench.safeio import FileRefused, check_audio_input
    from bench.textsafe import clip

    try:
        check_audio_input(path)
    except FileRefused as exc:
        return None if exc.missing else f"{clip(str(path))} cannot be analysed: {exc.reason}"
    return None


def run_analyze(args: argparse.Namespace) -> int:
    from bench.analyze import ProgressBar, analyse_file, format_summary
    from bench.pipes import write_line

    settings = settings_from_args(args)
    from bench.clockfile import parse_clock_ppm

    clock_ppm = parse_clock_ppm(args.clock_ppm)
    locked = None
    if args.lock:
        from bench.tuning.notes import parse_note

        locked = parse_note(args.lock)
    paths = _expand(args.files)
    if not paths:
        raise AudioFileError(f"no audio files found in {' '.join(args.files)}")
    if args.csv and len(paths) > 1:
        raise SettingsError(f"--csv takes one input, got {len(paths)}; use --csv-dir DIR")
    if args.csv_dir:
        stems = [p.stem for p in paths]
        dupes = sorted({s for s in stems if stems.count(s) > 1})
        if dupes:
            raise SettingsError(
                f"inputs share the stem {dupes[0]!r}, their CSVs would collide in --csv-dir; "
                "analyse them in separate runs"
            )
    _check_outputs(args, paths)
    failed: list[str] = []
    warned: list[str] = []
    for i, path in enumerate(paths):
        problem = _input_problem(path)
        if problem is not None:
            failed.append(problem)
            print(f"error: {problem}", file=sys.stderr)
            continue
        csv_path = args.csv if args.csv else (args.csv_dir / f"{path.stem}.csv" if args.csv_dir else None)
        bar = ProgressBar(path.name)
        try:
            result = analyse_file(
                path, settings, csv_path=csv_path, locked_midi=locked, progress=bar, overwrite=args.overwrite,
                clock_ppm=clock_ppm,
            )  # fmt: skip
        except BenchError as exc:
            bar.close()
            from bench.textsafe import one_line

            failed.append(one_line(str(exc)))
            print(f"error: {failed[-1]}", file=sys.stderr)
            continue
        bar.close()
        # A closed stdout (| head) stops the summaries, never the frame logs of the batch.
        write_line(("\n" if i else "") + format_summary(result, settings))
        if len(paths) > 1:
            warned += [f"{path}: {w}" for w in result.warnings if not w.startswith("resampled")]
    if warned:
        print(f"\n{len(warned)} warning(s) in the files analysed:", file=sys.stderr)
        for line in warned:
            print(f"  {line}", file=sys.stderr)
    if failed:
        print(f"\n{len(failed)} of {len(paths)} files could not be analysed:", file=sys.stderr)
        for line in failed:
            print(f"  {line}", file=sys.stderr)
        return 1
    if not args.csv and not args.csv_dir:
        write_line("(no frame log written; add --csv PATH or --csv-dir DIR)")
    return 0
