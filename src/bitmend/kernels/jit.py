"""numba, as every compiled kernel module imports it (`from bitmend.kernels.jit import njit`).

When numba loads its array support it looks for scipy's BLAS (scipy.linalg.cython_blas,
for np.dot and np.linalg inside compiled code) and, scipy being installed, imports
scipy.linalg: about 0.27 s of the ~0.8 s that numba costs a command here. No kernel of
ours uses BLAS. So a command-line process (`cli.main` sets `loader.Settings.numba_without_blas`)
loads numba's array support with that module hidden; numba then only refuses BLAS calls
in code it compiles, and the module is unhidden at once, so scipy itself works as
always. A program that imports bitmend as a library keeps numba as it is.
"""

from __future__ import annotations

import sys

from bitmend.kernels.loader import Settings

_BLAS = "scipy.linalg.cython_blas"


def _load_array_support() -> None:
    hide = (Settings.numba_without_blas and _BLAS not in sys.modules
            and "numba.np.arraymath" not in sys.modules)
    if hide:
        sys.modules[_BLAS] = None  # type: ignore[assignment]  # an import of it now fails at once
    try:
        import numba.np.arraymath  # noqa: F401
    finally:
        if hide:
            del sys.modules[_BLAS]


_load_array_support()

from numba import njit, types  # noqa: E402
from numba.extending import intrinsic  # noqa: E402

__all__ = ["njit", "types", "intrinsic"]
