"""The bench workflow: what each note did, and what an adjustment changed.

* :mod:`bench.workflow.captures` -- settled-note captures, live (``CaptureDetector``) and from
  a frame log (``captures_from_readings``), and their CSV file;
* :mod:`bench.workflow.profiles` -- instrument profiles: compass, registers, transposition;
* :mod:`bench.workflow.chart` -- the tuning chart per note and register (text, CSV, picture);
* :mod:`bench.workflow.compare` -- before/after comparison of two sessions;
* :mod:`bench.workflow.blowing` -- cents against level and the register break.

Nothing here imports matplotlib at import time; the picture functions import it when called.
"""
