"""INTERFACE STUB -- the streaming analyser (pitch, level, harmonics, register monitor).

Contract other modules code against::

    an = StreamingAnalyser(sample_rate=48000)        # any rate 16-96 kHz
    an.frame_size, an.hop_size, an.sample_rate       # samples; hop <= 10 ms
    frames: list[Frame] = an.process(block)          # block: 1-D float array, any length
    an.lock(target_hz)                               # judge register against this note; None releases
    an.reset()                                       # back to the state after construction
"""
