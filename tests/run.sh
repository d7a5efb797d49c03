#!/usr/bin/env bash
# The whole test suite, with everything it needs installed first.
# Debian packages (PortAudio, a JACK server, ALSA tools, libsndfile, sox, rsvg, and fluidsynth with
# the FluidR3 General MIDI soundfont for the sampled recorder and flute notes) when run as root
# on Debian/Ubuntu; Python packages with pip from the project's own pyproject.toml.
set -euo pipefail
cd "$(dirname "$0")/.."

DEBS="libportaudio2 jackd2 alsa-utils libsndfile1 sox librsvg2-bin tmux fluidsynth fluid-soundfont-gm"
if command -v apt-get >/dev/null 2>&1 && [ "$(id -u)" = 0 ]; then
    missing=""
    for p in $DEBS; do
        dpkg -s "$p" >/dev/null 2>&1 || missing="$missing $p"
    done
    if [ -n "$missing" ]; then
        echo "installing Debian packages:$missing"
        apt-get update -qq
        # jackd2 asks about real-time priority: answer no, non-interactively.
        echo "jackd2 jackd/tweak_rt_limits boolean false" | debconf-set-selections
        DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $missing >/dev/null
    fi
else
    echo "not root or no apt-get: Debian packages not installed; audio-path tests may skip"
fi

python3 -m pip install -q --disable-pip-version-check -e ".[test]"
# exit status 5 (no test collected) fails the run like any other failure
exec python3 -m pytest "$@"
