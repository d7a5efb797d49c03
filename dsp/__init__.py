"""Pure signal processing for bench: arrays in, frozen results out.

No files, devices, threads, clocks or printing here.
"""
