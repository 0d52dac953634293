"""Lazy access to the compiled kernels, so small jobs never pay for loading numba.

numba and the cached machine code of our kernels take about 0.2-0.3 s to load. A process
that only moves a few small segments uses the numpy twins in kernels.small instead; the
first large piece of work loads the compiled kernels, and from then on everything uses
them. Many small pieces (a stream of short records or datagrams) load them too, once their
work adds up to about what the load costs: the numpy twins spend ~0.3 s on 2^21 bits of
small segments, so a long run of packets pays the load once instead of the twins' overhead
on every packet (the rent-or-buy rule).
"""

from __future__ import annotations

import sys
from types import ModuleType

SMALL_WORK_BITS = 1 << 16  # work below this size runs in numpy until numba is loaded
SMALL_WORK_TOTAL_BITS = 1 << 21  # small work adding up to this loads numba too


class Settings:
    """Process-wide choices made before numba loads (see kernels.jit)."""

    numba_without_blas = False  # set by the command line: numba loads without scipy's BLAS


class _Tally:
    small_bits = 0  # work done in the numpy twins so far in this process
    modules: tuple[ModuleType, ModuleType] | None = None  # (bitfields, blockcode) once loaded


def _worth_loading(work_bits: int) -> bool:
    if work_bits >= SMALL_WORK_BITS:
        return True
    _Tally.small_bits += work_bits
    return _Tally.small_bits >= SMALL_WORK_TOTAL_BITS


def compiled_loaded() -> bool:
    return "bitmend.kernels.blockcode" in sys.modules


def compiled(work_bits: int) -> tuple[ModuleType, ModuleType] | None:
    """(bitfields, blockcode) when already loaded or when work_bits is large, else None."""
    if _Tally.modules is not None:  # asked for every segment: answered without an import statement
        return _Tally.modules
    if compiled_loaded() or _worth_loading(work_bits):
        from bitmend.kernels import bitfields, blockcode

        _Tally.modules = (bitfields, blockcode)
        return _Tally.modules
    return None


def compiled_unless_small(work_bits: int) -> tuple[ModuleType, ModuleType] | None:
    """compiled(work_bits), but for small work not yet loaded for: None, and the work is
    not added to the tally. For a caller that only asks whether a compiled path is open
    before falling back to one that asks compiled() itself (the work counted once)."""
    if _Tally.modules is None and not compiled_loaded() and work_bits < SMALL_WORK_BITS:
        return None
    return compiled(work_bits)


def compiled_cyclic(work_bits: int) -> ModuleType | None:
    """kernels.cyclic (BCH and Reed-Solomon) on the same terms as compiled(): once numba
    is loaded anyway, or when work_bits is large; else None (use kernels.cyclic_small)."""
    if "bitmend.kernels.cyclic" in sys.modules or compiled_loaded() or _worth_loading(work_bits):
        from bitmend.kernels import cyclic

        return cyclic
    return None
