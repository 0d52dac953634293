"""The compiled kernels load late: never for one small job, but once small jobs add up."""

from __future__ import annotations

import subprocess
import sys

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
