"""Shared keys for keyed frames, read from a key file.

A key file holds a secret of at least 16 bytes, either raw (for example
`head -c 32 /dev/urandom > gauge.key`) or as hexadecimal text (whitespace ignored). A file
that anyone on the machine may read is refused: the key is what tells the receiver a frame
came from a holder of the key, so it must stay secret (`chmod 600 gauge.key`).
"""

from __future__ import annotations

import os
import stat
import string

from bitmend.errors import SettingError

MIN_KEY_BYTES = 16  # 128 bits: the strength of the truncated tag
MAX_KEY_FILE_BYTES = 4096
_HEX = set(string.hexdigits) | set(string.whitespace)


class KeyFileError(SettingError):
    """A key file that cannot be used: one line naming the file and the reason."""


def load_key_file(path: str | os.PathLike) -> bytes:
    """The key in a key file (raw bytes, or hex text). Raises KeyFileError for a file that
    others can read, that is too short or too long, and OSError if it cannot be read."""
    name = os.fspath(path)
    with open(name, "rb") as f:
        info = os.fstat(f.fileno())
        raw = f.read(MAX_KEY_FILE_BYTES + 1)
    if stat.S_ISREG(info.st_mode) and info.st_mode & (stat.S_IROTH | stat.S_IWOTH):
        raise KeyFileError(f"{name}: a key file must not be readable or writable by others "
                           f"(mode {stat.S_IMODE(info.st_mode):04o}); chmod 600 {name}")
    if len(raw) > MAX_KEY_FILE_BYTES:
        raise KeyFileError(f"{name}: longer than {MAX_KEY_FILE_BYTES} bytes; a key file holds one key")
    key = raw
    text = raw.decode("ascii", "replace")
    if raw.strip() and set(text) <= _HEX:  # hex text (random raw bytes are never all hex digits)
        digits = "".join(text.split())
        if len(digits) % 2:
            raise KeyFileError(f"{name}: hex key with an odd number of digits ({len(digits)})")
        key = bytes.fromhex(digits)
    if len(key) < MIN_KEY_BYTES:
        raise KeyFileError(f"{name}: the key is {len(key)} bytes; at least {MIN_KEY_BYTES} are needed "
                           f"(e.g. head -c 32 /dev/urandom > {os.path.basename(name)})")
    return key
