"""The model is a pure part (STYLE.md section 9): it loads without the screen, the audio
libraries or the GPL reference library used by its tests."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

MODULES = ["bench.model.acoustics", "bench.model.instrument", "bench.model.predict", "bench.model.fit",
           "bench.model.whatif", "bench.commands.model"]


@pytest.mark.parametrize("module", MODULES)
def test_model_loads_without_screen_audio_or_openwind(module):
    code = (
        "import importlib, json, sys\n"
        f"importlib.import_module({module!r})\n"
        "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in "
        "('textual', 'sounddevice', '_sounddevice', 'openwind'))))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(done.stdout) == []
