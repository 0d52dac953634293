"""Lazy access to the compiled kernels, so small jobs never pay for loading numba.

numba and the cached machine code of our kernels take about 0.2-0.3 s to load. A process
that only moves a few small segments uses the numpy twins in kernels.small instead; the
first large piece of work loads the compiled kernels, and from then on everything uses
them.
"""

from __future__ import annotations

import sys
from types import ModuleType

SMALL_WORK_BITS = 1 << 16  # work below this size runs in numpy until numba is loaded


def compiled_loaded() -> bool:
    return "bitmend.kernels.blockcode" in sys.modules


def compiled(work_bits: int) -> tuple[ModuleType, ModuleType] | None:
    """(bitfields, blockcode) when already loaded or when work_bits is large, else None."""
    if compiled_loaded() or work_bits >= SMALL_WORK_BITS:
        from bitmend.kernels import bitfields, blockcode

        return bitfields, blockcode
    return None


def compiled_cyclic(work_bits: int) -> ModuleType | None:
    """kernels.cyclic (BCH and Reed-Solomon) on the same terms as compiled(): once numba
    is loaded anyway, or when work_bits is large; else None (use kernels.cyclic_small)."""
    if "bitmend.kernels.cyclic" in sys.modules or compiled_loaded() or work_bits >= SMALL_WORK_BITS:
        from bitmend.kernels import cyclic

        return cyclic
    return None
