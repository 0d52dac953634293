"""A bounded run of the coverage-guided fuzz target (fuzz/fuzz_decoder.py) in CI."""

from __future__ import annotations

import re
import subprocess
import sys

import pytest

from conftest import REPO_ROOT

pytest.importorskip("atheris")

FUZZ_SECONDS = 6


def test_fuzzing_the_decoder_for_a_bounded_time_finds_no_crash(tmp_path):
    run = subprocess.run(
        [sys.executable, str(REPO_ROOT / "fuzz" / "fuzz_decoder.py"), f"-max_total_time={FUZZ_SECONDS}",
         "-seed=20261201", f"-artifact_prefix={tmp_path}/"],
        capture_output=True, text=True, timeout=FUZZ_SECONDS + 120)
    tail = "\n".join(run.stderr.splitlines()[-15:])
    assert run.returncode == 0, f"fuzzer found a crash:\n{tail}"
    done = re.search(r"Done (\d+) runs", run.stderr)
    assert done and int(done.group(1)) > 100, f"the fuzzer barely ran:\n{tail}"
