"""Reading TOML input files (private): one place for the errors a user can meet."""

import tomllib
from pathlib import Path

from cwlimits.errors import ConfigError

__all__ = ["load_toml"]


def load_toml(path, what="file"):
    """Parse a TOML file with :mod:`tomllib` (never evaluated), raising located errors.

    Parameters
    ----------
    path : str or Path
    what : str
        What the file is, for the messages ("setup file", "configuration file", ...).

    Raises
    ------
    ConfigError
        Missing file, a folder, text that is not UTF-8, or a TOML syntax error.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ConfigError(f"{what} not found", file=str(path)) from None
    except IsADirectoryError:
        raise ConfigError(f"is a folder, not a {what}", file=str(path)) from None
    except OSError as exc:
        raise ConfigError(f"cannot read the {what} ({exc.strerror})", file=str(path)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ConfigError("not UTF-8 text", file=str(path)) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML: {exc}", file=str(path)) from None
