"""bench: a real-time tuner and register monitor for duct flutes."""

__version__ = "0.1.0"
