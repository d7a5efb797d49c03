"""``bench devices``: the audio inputs PortAudio lists, with what ``--device`` takes."""

from __future__ import annotations

import argparse
from collections.abc import Sequence
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from bench.sources.mic import InputDevice


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "devices",
        help="list audio input devices",
        description="List the audio input devices: index (for --device), name, input channels, "
        "default sample rate and host API. '*' marks the default input.",
    )
    p.set_defaults(func=run_devices)


def format_devices(devices: Sequence[InputDevice], default_index: int | None) -> list[str]:
    """Table lines for :func:`bench.sources.mic.list_input_devices` output."""
    width = max([len(d.name) for d in devices] + [4])
    lines = [f"   {'index':>5}  {'name':<{width}}  {'ch':>3}  {'rate Hz':>8}  host API"]
    for d in devices:
        mark = "*" if d.index == default_index else " "
        lines.append(
            f" {mark} {d.index:>5}  {d.name:<{width}}  {d.channels:>3}  {d.default_rate_hz:>8.0f}  {d.host_api}"
        )
    return lines


def run_devices(args: argparse.Namespace) -> int:
    from bench.sources.mic import (
        _default_input_index,
        import_sounddevice,
        list_input_devices,
    )

    devices = list_input_devices()
    if not devices:
        print("no audio input devices found; connect a microphone, or use 'bench demo'")
        return 1
    default = _default_input_index(import_sounddevice())
    for line in format_devices(devices, default):
        print(line)
    return 0
