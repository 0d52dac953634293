"""The compiled kernels load late: never for one small job, but once small jobs add up."""

from __future__ import annotations

import gc
import subprocess
import sys

import pytest

import bitmend

PROBE = """
import sys, bitmend
bitmend.decode_bytes(bitmend.encode_bytes(b"gauge 7 stage 1.42m", code="hamming-7-4", depth=2))
one = "bitmend.kernels.blockcode" in sys.modules
blobs = list(bitmend.encode_records([b"G%05d stage=1.42m" % i for i in range(3000)], code="golay-24-12", depth=8))
records = list(bitmend.decode_records(blobs))
print(one, "bitmend.kernels.blockcode" in sys.modules, len(records))
"""


def test_one_packet_never_loads_numba_but_thousands_of_small_ones_do():
    run = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    assert run.stdout.split() == ["False", "True", "3000"]


BLAS_PROBE = """
import sys
from bitmend.kernels.loader import Settings
Settings.numba_without_blas = {hide}
import bitmend.kernels.fused
import numba.np.arraymath
import scipy.stats  # scipy itself still loads its BLAS afterwards
print(numba.np.arraymath._HAVE_BLAS, sys.modules["scipy.linalg.cython_blas"] is not None,
      round(float(scipy.stats.norm.ppf(0.975)), 2))
"""


def test_the_command_line_loads_numba_without_scipys_blas_and_a_library_user_keeps_it():
    # kernels/jit.py: only a process that asks for it (cli.main does) hides the module, and
    # only while numba's array support loads; scipy works as always after
    for hide, want in (("True", "False"), ("False", "True")):
        run = subprocess.run([sys.executable, "-c", BLAS_PROBE.format(hide=hide)], capture_output=True, text=True,
                             timeout=300)
        assert run.returncode == 0, run.stderr
        assert run.stdout.split() == [want, "True", "1.96"]


ASK_PROBE = """
import sys
from bitmend.kernels import loader
small = loader.compiled_unless_small(loader.SMALL_WORK_BITS - 1)
print(small is None, loader._Tally.small_bits, "bitmend.kernels.blockcode" in sys.modules,
      loader.compiled_unless_small(loader.SMALL_WORK_BITS) is not None)
"""


def test_asking_whether_compiled_kernels_are_open_leaves_small_work_uncounted():
    # a path that only asks (interleave's in-place rows) must not count small work that
    # the fallback path then counts again: the load would come at half the intended work
    run = subprocess.run([sys.executable, "-c", ASK_PROBE], capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    assert run.stdout.split() == ["True", "0", "False", "True"]


WARM_UP_PROBE = """
import gc, sys, bitmend
before = gc.get_freeze_count()
bitmend.warm_up()  # the default code and depth, whose kernels every other test loads too
print(before, "bitmend.kernels.blockcode" in sys.modules, gc.get_freeze_count())
"""


def test_warm_up_loads_the_kernels_at_once_and_freezes_what_exists():
    # warmup.py: a program calls it at start; the ~100,000 objects numba leaves (counted
    # with gc.get_objects: 77,000 after its import alone) go to the permanent generation
    run = subprocess.run([sys.executable, "-c", WARM_UP_PROBE], capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    before, loaded, frozen = run.stdout.split()
    assert before == "0" and loaded == "True" and int(frozen) > 50_000


def test_warm_up_without_freezing_leaves_the_collector_alone_and_names_a_wrong_code():
    frozen = gc.get_freeze_count()
    bitmend.warm_up(["hamming-7-4", "golay-24-12"], [1, 8], freeze=False)
    assert gc.get_freeze_count() == frozen
    with pytest.raises(bitmend.UnknownCodeError, match="unknown code 'golay-24'"):
        bitmend.warm_up(["golay-24"], freeze=False)
