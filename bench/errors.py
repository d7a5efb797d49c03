"""Error classes of the application; each message is one line that says what to do."""


class BenchError(Exception):
    """Base of every error the application reports to the user in one line."""


class SettingsError(BenchError, ValueError):
    """A tuning setting, option value or settings file is invalid."""


class AudioFileError(BenchError):
    """An audio file cannot be read or holds no usable audio."""


class DeviceError(BenchError):
    """An audio input device is missing, busy or cannot be opened."""


class LogError(BenchError):
    """The session log cannot be written."""


class GeometryError(BenchError, ValueError):
    """An instrument geometry file is missing, malformed or describes an impossible instrument."""
