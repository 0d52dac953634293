"""What keeps the command line's start-up short: `import bitmend` loads no numpy, the CLI
builds only the command it runs (with the same help and errors as the whole app), and
numpy's BLAS threads are not started. Speed itself is measured by benchmarks/startup.py."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest
from typer.testing import CliRunner

from bitmend import cli


def modules_after(code: str, env: dict | None = None) -> dict:
    probe = f"import sys, os, json\n{code}\nprint(json.dumps({{'numpy': 'numpy' in sys.modules, " \
            f"'typer': 'typer' in sys.modules, 'blas': os.environ.get('OPENBLAS_NUM_THREADS')}}))"
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=60,
                          env=env)
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_import_bitmend_loads_neither_numpy_nor_typer():
    assert modules_after("import bitmend")["numpy"] is False
    assert modules_after("import bitmend")["typer"] is False


def test_the_command_line_module_loads_no_numpy():
    assert modules_after("import bitmend.cli")["numpy"] is False


def test_public_names_and_submodules_still_load_on_first_use():
    import bitmend

    assert bitmend.encode_bytes is bitmend.api.encode_bytes
    assert bitmend.DEFAULT_CODE == "golay-24-12"
    assert bitmend.HeaderError.__module__ == "bitmend.container.format"
    with pytest.raises(AttributeError, match="no attribute 'no_such_part'"):
        bitmend.no_such_part  # noqa: B018
    with pytest.raises(AttributeError):
        bitmend._private  # noqa: B018


COMMAND_LINES = [["encode", "--help"], ["decode", "--help"], ["inspect", "--help"], ["inject", "--help"],
                 ["simulate", "--help"], ["plan", "--help"], ["demo", "--help"], ["encode", "--depth", "0"],
                 ["decode", "--on-error", "sometimes"], ["encode", "a", "b", "c"], ["plan"]]


@pytest.mark.parametrize("args", COMMAND_LINES, ids=" ".join)
def test_an_app_of_one_command_parses_helps_and_refuses_as_the_whole_app(args):
    runner = CliRunner()
    single = cli._app_for(args)
    assert single is not cli.app
    whole = runner.invoke(cli.app, args, prog_name="bitmend", terminal_width=100)
    alone = runner.invoke(single, args, prog_name="bitmend", terminal_width=100)
    assert (alone.exit_code, alone.output) == (whole.exit_code, whole.output)
    assert "Usage: bitmend " + args[0] in whole.output


@pytest.mark.parametrize("args", [[], ["--help"], ["codes"], ["codes", "show", "rep-3"], ["encodee"], ["-x"]])
def test_the_whole_app_runs_what_is_not_one_top_level_command(args):
    assert cli._app_for(args) is cli.app


def test_every_top_level_command_gets_an_app_of_its_own():
    names = {"encode", "decode", "inspect", "inject", "simulate", "plan", "demo"}
    assert {name for name in names if cli._app_for([name]) is not cli.app} == names


def test_the_command_line_starts_no_blas_threads_unless_the_user_asks():
    run = "from bitmend import cli\nsys.argv = ['bitmend', 'codes']\ntry:\n    cli.main()\nexcept SystemExit:\n    pass"
    env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
    assert modules_after(run, env)["blas"] == "1"
    assert modules_after(run, {**env, "OPENBLAS_NUM_THREADS": "2"})["blas"] == "2"
