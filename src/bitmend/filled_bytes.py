"""A new `bytes` object of a known size, filled in place.

`encode_bytes` returns the whole container as `bytes`. Joining the runs of frames into
one at the end copies the container once more, into fresh memory the system maps page by
page: a fifth of the time of encoding 64 MiB with golay-24-12, and twice the container in
memory at the end. CPython's C API has the sanctioned way to fill a bytes object in place:
PyBytes_FromStringAndSize(NULL, size) makes one whose contents are uninitialised, and its
documentation allows writing through PyBytes_AsString "if the object was just created
using PyBytes_FromStringAndSize(NULL, size)". The frames are coded straight into it.

The object must not be handed to anyone before it is full; the writable array over it is
dropped first. Where the C API is not reachable through ctypes (an interpreter other than
CPython), fillable_bytes answers None and the caller joins pieces as before.
"""

from __future__ import annotations

import ctypes

import numpy as np

_API = getattr(ctypes, "pythonapi", None)
if _API is not None:
    _new_bytes = _API.PyBytes_FromStringAndSize
    _new_bytes.restype = ctypes.py_object
    _new_bytes.argtypes = (ctypes.c_char_p, ctypes.c_ssize_t)
    _contents = _API.PyBytes_AsString
    _contents.restype = ctypes.c_void_p
    _contents.argtypes = (ctypes.py_object,)

SMALLEST = 2  # CPython shares one object for each bytes of length 0 and 1: never fill those


def fillable_bytes(size: int) -> tuple[bytes, np.ndarray] | None:
    """(a new bytes object of `size` bytes, contents not yet set, and a writable uint8
    array over them), or None where that cannot be made (see the module docstring) or
    size < SMALLEST."""
    if _API is None or size < SMALLEST:
        return None
    blob = _new_bytes(None, size)
    return blob, np.ctypeslib.as_array((ctypes.c_uint8 * size).from_address(_contents(blob)))
