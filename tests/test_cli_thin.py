"""The command line as a thin layer: typer checks the options, library errors map to exit
codes by their group in one place, help screens read well, and encode and decode load no
more of the library than they use."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys

import pytest
import typer.main

from conftest import bitmend_command, random_bytes, run_cli

from bitmend import cli
from bitmend.cli_options import Framing, OnError, Per, flowed
from bitmend.errors import SettingError

HELP_SCREENS = [(), ("codes",), ("codes", "show"), ("encode",), ("decode",), ("inspect",), ("inject",),
                ("simulate",), ("plan",), ("demo",)]
# what typer's own copy of click shows for a parameter without a metavar: <str>, <int>, <bool> ...
TYPE_METAVAR = re.compile(r"<(?:str|int|float|bool|text|integer|boolean|path|func)>", re.IGNORECASE)


def run_help(*args: str, rich: bool) -> str:
    env = dict(os.environ, TYPER_USE_RICH="1" if rich else "0")
    env.pop("COLUMNS", None)
    proc = subprocess.run([*bitmend_command(), *args, "--help"], capture_output=True, env=env, timeout=60)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout.decode()


# ---- help screens ----------------------------------------------------------------------------------

@pytest.mark.parametrize("rich", [True, False], ids=["rich", "plain"])
@pytest.mark.parametrize("screen", HELP_SCREENS, ids=lambda s: " ".join(s) or "bitmend")
def test_help_screens_show_named_metavars_never_a_type_name(screen, rich):
    text = run_help(*screen, rich=rich)
    assert not TYPE_METAVAR.findall(text), text
    assert "--help" in text and "--help <" not in text and "--help BOOL" not in text


def test_every_command_summary_is_one_sentence_that_the_command_list_shows_whole():
    group = typer.main.get_command(cli.app)
    listed = " ".join(re.sub(r"[│╭╮╰╯─]", " ", run_help(rich=True)).split())
    for name, command in group.commands.items():
        summary = command.short_help
        assert summary, name
        assert summary.endswith(".") and ". " not in summary[:-1], (name, summary)
        assert f"{name} {summary}" in listed, (name, summary)
        assert command.help.startswith(summary)  # the long text stays in the command's own --help


def test_flowed_help_keeps_paragraphs_and_joins_their_lines():
    assert flowed("""First line
        goes on.

        Second paragraph
        here.""") == "First line goes on.\n\nSecond paragraph here."


def test_choice_enums_hold_exactly_the_library_choices():
    from bitmend.container.assembler import ON_ERROR_CHOICES
    from bitmend.planning import PER_CHOICES
    from bitmend.records import FRAMINGS

    assert tuple(c.value for c in OnError) == ON_ERROR_CHOICES
    assert tuple(c.value for c in Framing) == FRAMINGS
    assert tuple(c.value for c in Per) == PER_CHOICES


# ---- usage errors: typer's own checks, one line, exit 2 -------------------------------------------

@pytest.mark.parametrize("args, names", [
    (("encode", "--depth", "0"), "--depth"),
    (("encode", "--frame-bytes", "0"), "--frame-bytes"),
    (("encode", "--frame-bytes", "1048577"), "--frame-bytes"),
    (("encode", "--records", "nope"), "--records"),
    (("encode", "--max-delay", "0"), "--max-delay"),
    (("encode", "--max-delay", "nan"), "--max-delay"),
    (("encode", "--idle", "-1"), "--idle"),
    (("decode", "--on-error", "nope"), "--on-error"),
    (("decode", "--records", "u8"), "--records"),
    (("decode", "--records", "line", "--on-error", "zero"), "--on-error"),
    (("inject", "--channel", "bsc:p=0.1", "--seed", "-1"), "--seed"),
    (("simulate", "--channel", "bsc:p=0.1", "--bits", "1.5"), "--bits"),
    (("simulate", "--channel", "bsc:p=0.1", "--workers", "0"), "--workers"),
    (("simulate", "--channel", "bsc:p=0.1", "--connect-timeout", "0"), "--connect-timeout"),
    (("plan", "--channel", "bsc:p=0.1", "--target", "1e-9", "--per", "byte"), "--per"),
    (("plan", "--channel", "bsc:p=0.1", "--target", "1e-9", "--max-depth", "256"), "--max-depth"),
    (("codes", "show", "hamming-7-4", "--at", "0.5"), "--at"),
    (("demo", "--seed", "-3"), "--seed"),
])
def test_bad_option_values_are_one_line_naming_the_option_and_exit_2(args, names):
    run = run_cli(*args)
    assert run.code == 2, run.err
    assert len(run.err_lines) == 1 and run.err_lines[0].startswith("bitmend: "), run.err
    assert names in run.err and "Traceback" not in run.err
    assert run.out == b""


# ---- library errors: one place, by group ----------------------------------------------------------

def _exit_code_of(exc: Exception) -> tuple[int, str]:
    """(exit code, stderr line) that cli._errors() gives for exc."""
    import contextlib
    import io

    err = io.StringIO()
    with contextlib.redirect_stderr(err), pytest.raises(typer.Exit) as done:
        with cli._errors():
            raise exc
    return done.value.exit_code, err.getvalue().strip()


def test_library_errors_map_to_exit_codes_by_their_group():
    from bitmend.channel.drop import NoFramesError
    from bitmend.channel.spec import ChannelSpecError
    from bitmend.codes.catalog import UnknownCodeError
    from bitmend.container.assembler import DamagedDataError, NotAContainerError
    from bitmend.keyfile import KeyFileError

    assert _exit_code_of(DamagedDataError("frame 3 at byte 9 is damaged")) == (
        1, "bitmend: stopped: frame 3 at byte 9 is damaged")
    assert _exit_code_of(NotAContainerError("no decodable bitmend frame"))[0] == 3
    assert _exit_code_of(NoFramesError("drop: no bitmend frame"))[0] == 3
    assert _exit_code_of(UnknownCodeError("unknown code 'x'"))[0] == 2
    assert _exit_code_of(ChannelSpecError("bad spec"))[0] == 2
    assert _exit_code_of(KeyFileError("short key"))[0] == 2
    assert _exit_code_of(SettingError("depth must be 1..255, got 0")) == (2, "bitmend: depth must be 1..255, got 0")


def test_container_errors_are_not_reported_as_io_errors_although_they_are_oserrors():
    from bitmend.container.assembler import NotAContainerError

    code, line = _exit_code_of(NotAContainerError("no decodable bitmend frame found in the input"))
    assert isinstance(NotAContainerError("x"), OSError)
    assert (code, line) == (3, "bitmend: no decodable bitmend frame found in the input")


def test_a_plain_os_error_is_an_io_error_with_exit_3():
    assert _exit_code_of(FileNotFoundError(2, "No such file or directory", "gone.bin")) == (
        3, "bitmend: I/O error gone.bin: No such file or directory")


# ---- text -------------------------------------------------------------------------------------------

def test_codes_names_the_default_once_and_explains_designed_distances():
    run = run_cli("codes")
    text = run.out.decode()
    assert run.code == 0 and "(default)" not in text
    assert text.count("default") == 2  # golay-24-12's use column and the legend's first words
    assert ">=5" in text and "d >= n" not in text
    assert "designed distance (BCH), a lower bound" in text


def test_decode_of_one_frame_says_frame_in_the_singular():
    blob = run_cli("encode", stdin=b"one frame of river-gauge data\n").out
    run = run_cli("decode", stdin=blob)
    assert run.code == 0
    assert ": 1 frame, 1 clean," in run.err and "1 frames" not in run.err


# ---- start-up ----------------------------------------------------------------------------------------

HEAVY = ("bitmend.planning", "bitmend.simulate", "bitmend.campaign", "bitmend.plot", "bitmend.properties",
         "matplotlib", "dask", "distributed", "scipy")

PROBE = """
import io, json, sys
from bitmend import cli
sys.argv = ["bitmend", *sys.argv[1:]]
try:
    cli.main()
except SystemExit as done:
    loaded = sorted({m for m in sys.modules for h in HEAVY if m == h or m.startswith(h + ".")})
    print(json.dumps({"code": done.code, "loaded": loaded}), file=sys.stderr)
"""


@pytest.mark.parametrize("command", ["encode", "decode"])
def test_encode_and_decode_load_no_planning_simulation_plotting_or_dask(command):
    data = random_bytes(200, 5)
    stdin = data if command == "encode" else run_cli("encode", stdin=data).out
    probe = f"HEAVY = {HEAVY!r}\n" + PROBE
    proc = subprocess.run([sys.executable, "-c", probe, command], input=stdin, capture_output=True, timeout=60)
    report = json.loads(proc.stderr.decode().strip().splitlines()[-1])
    assert report == {"code": 0, "loaded": []}
