"""Audio inputs behind one protocol (:class:`bench.sources.base.AudioSource`).

``mic`` (the only importer of sounddevice), ``wavfile`` and ``demo`` hand out mono float32
blocks through the same framing; import the one you need, so the file and demo sources
work where PortAudio is missing.
"""
