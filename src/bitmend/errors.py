"""The root of every error bitmend raises on purpose, and the groups under it.

    BitmendError                      catch this to catch any of them
    ├── CodeError (ValueError)        a code name, definition or parameters that cannot be used
    ├── ContainerError (OSError)      a container that cannot be read, or data that failed its checks
    └── SettingError (ValueError)     a setting out of range: depth, frame size, key, records, ...

Container errors are OSError subclasses, as the standard library's compressed-file errors
are (gzip.BadGzipFile). The classes released before this root existed keep their old
built-in bases as well (ValueError, KeyError), so code written against them still works.
Each concrete class lives beside the code that raises it; the package exports them all.
"""

from __future__ import annotations


class BitmendError(Exception):
    """Any error bitmend raises on purpose (programming errors stay TypeError and the like)."""


class CodeError(BitmendError, ValueError):
    """A code that cannot be named, defined or built."""


class ContainerError(BitmendError, OSError):
    """A container that cannot be read, or data that failed its checks."""


class SettingError(BitmendError, ValueError):
    """A setting outside what the format or the tool can carry."""
