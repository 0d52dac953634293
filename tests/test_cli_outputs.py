"""Where the command line writes, and how a run that stops early leaves its files: `-o` to
regular files, symlinks, devices, FIFOs, sockets and /dev/stdout; the same file named twice;
SIGINT, SIGTERM and SIGHUP; a reader of stdout that goes away; a closed stdin or stdout.
Every case runs `python -m bitmend` as a real process with real pipes, in tmp_path only
(devices are private nodes made with os.mknod; the tests run as root)."""

from __future__ import annotations

import json
import os
import signal
import socket
import stat
import subprocess
import threading
import time
from pathlib import Path

import pytest

from bitmend import outputs
from bitmend.api import encode_bytes

from conftest import bitmend_command, random_bytes, run_cli

TIMEOUT = 60  # seconds for any one process or wait
BROKEN_PIPE_EXIT = 141  # 128 + SIGPIPE, what shells show; documented in README and cli.py
needs_root = pytest.mark.skipif(os.geteuid() != 0, reason="making device nodes needs root")


@pytest.fixture(scope="module")
def data() -> bytes:
    """Small enough (frames of 1 KiB) that a process decodes it without loading numba."""
    return random_bytes(5000, 91)


@pytest.fixture(scope="module")
def container(data) -> bytes:
    return encode_bytes(data, frame_bytes=1024)


@pytest.fixture()
def container_file(tmp_path, container) -> Path:
    path = tmp_path / "gauges.bmd"
    path.write_bytes(container)
    return path


@pytest.fixture(scope="module")
def big_data() -> bytes:
    """Several times a pipe's 64 KiB buffer, so that a reader that stops early is noticed."""
    return random_bytes(300_000, 92)


@pytest.fixture()
def big_container_file(tmp_path, big_data) -> Path:
    path = tmp_path / "big.bmd"
    path.write_bytes(encode_bytes(big_data, frame_bytes=8192))
    return path


def char_device(path: Path, major: int, minor: int) -> Path:
    """A private character device node: (1, 3) reads and writes like /dev/null, (1, 7) like
    /dev/full, whose writes fail with ENOSPC (Linux devices.txt: mem major 1)."""
    os.mknod(path, stat.S_IFCHR | 0o600, os.makedev(major, minor))
    return path


def unblock_fifo_reader(fifo: Path, thread: threading.Thread) -> None:
    """If a reader thread still waits in open() (the writer never came), open the FIFO's other
    end for a moment so that it gets end-of-file and ends."""
    if thread.is_alive():
        try:
            os.close(os.open(fifo, os.O_WRONLY | os.O_NONBLOCK))
        except OSError:
            pass
        thread.join(TIMEOUT)


def part_files(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".part"))


def assert_one_line(run, code: int) -> str:
    assert run.code == code, run.err
    assert len(run.err_lines) == 1 and "Traceback" not in run.err, run.err
    assert run.err_lines[0].startswith("bitmend")
    return run.err_lines[0]


def last_object(path: Path) -> dict:
    return json.loads(path.read_text().splitlines()[-1])


def wait_for(condition, what: str) -> None:
    """Poll a condition for at most TIMEOUT seconds (no timing is asserted, only an end)."""
    deadline = time.monotonic() + TIMEOUT
    while not condition():
        assert time.monotonic() < deadline, f"gave up waiting for {what}"
        time.sleep(0.02)


def restore_default_signals() -> None:
    """Child set-up: default dispositions, whatever the test runner ignores (a background job
    ignores SIGINT), so that the handlers under test are installed."""
    for signum in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(signum, signal.SIG_DFL)


# ---- -o to a regular file -------------------------------------------------------------------------

def test_replacing_an_existing_file_keeps_its_mode(tmp_path, container_file, data):
    target = tmp_path / "station.log"
    target.write_bytes(b"yesterday's readings\n")
    target.chmod(0o640)
    run = run_cli("decode", str(container_file), "-o", str(target), "--quiet")
    assert run.code == 0, run.err
    assert target.read_bytes() == data
    assert stat.S_IMODE(target.stat().st_mode) == 0o640
    assert part_files(tmp_path) == []


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o077, 0o600)])
def test_a_new_output_file_is_made_under_the_umask(tmp_path, umask, mode):
    target = tmp_path / "gauges.bmd"
    proc = subprocess.run([*bitmend_command(), "encode", "-o", str(target)], input=b"stage_m=1.204\n",
                          capture_output=True, timeout=TIMEOUT, preexec_fn=lambda: os.umask(umask))
    assert proc.returncode == 0, proc.stderr
    assert stat.S_IMODE(target.stat().st_mode) == mode


def test_a_symlink_output_writes_its_target_and_stays_a_link(tmp_path, container_file, data):
    real = tmp_path / "archive" / "station.log"
    real.parent.mkdir()
    real.write_bytes(b"old")
    real.chmod(0o604)
    link = tmp_path / "latest.log"
    link.symlink_to(real)
    run = run_cli("decode", str(container_file), "-o", str(link), "--quiet")
    assert run.code == 0, run.err
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert real.read_bytes() == data and stat.S_IMODE(real.stat().st_mode) == 0o604
    assert part_files(tmp_path) == [] and part_files(real.parent) == []


def test_a_dangling_symlink_output_creates_the_file_it_points_to(tmp_path, container_file, data):
    real = tmp_path / "station.log"
    link = tmp_path / "latest.log"
    link.symlink_to(real.name)  # relative, as `ln -s station.log latest.log` makes it
    run = run_cli("decode", str(container_file), "-o", str(link), "--quiet")
    assert run.code == 0, run.err
    assert link.is_symlink() and real.read_bytes() == data


def test_a_failed_decode_leaves_an_existing_output_untouched_and_no_temp_file(tmp_path):
    target = tmp_path / "station.log"
    target.write_bytes(b"yesterday's readings\n")
    run = run_cli("decode", "-o", str(target), stdin=random_bytes(5000, 3))
    assert_one_line(run, 3)
    assert target.read_bytes() == b"yesterday's readings\n"
    assert part_files(tmp_path) == []


def test_a_directory_as_output_is_one_line_naming_it_and_exit_3(tmp_path, container_file):
    folder = tmp_path / "out"
    folder.mkdir()
    run = run_cli("decode", str(container_file), "-o", str(folder))
    line = assert_one_line(run, 3)
    assert str(folder) in line and "directory" in line and ".part" not in line
    assert list(folder.iterdir()) == [] and part_files(tmp_path) == []


# ---- -o to things that are not regular files ----------------------------------------------------

@needs_root
def test_a_null_device_output_is_written_into_and_stays_a_device(tmp_path, container_file):
    null = char_device(tmp_path / "null", 1, 3)
    run = run_cli("decode", str(container_file), "-o", str(null), "--quiet")
    assert run.code == 0, run.err
    st = null.lstat()
    assert stat.S_ISCHR(st.st_mode) and st.st_rdev == os.makedev(1, 3)
    assert part_files(tmp_path) == []


@needs_root
@pytest.mark.parametrize("command", [("decode", "{container}"), ("encode", "{container}"),
                                     ("inject", "{container}", "--channel", "bsc:p=1e-3", "--seed", "1")])
def test_a_full_device_output_exits_3_with_one_line_naming_the_path(tmp_path, container_file, command):
    full = char_device(tmp_path / "full", 1, 7)
    args = [a.format(container=container_file) for a in command]
    quiet = ["--quiet"] if command[0] != "encode" else []
    run = run_cli(*args, "-o", str(full), *quiet)
    line = assert_one_line(run, 3)
    assert str(full) in line and "No space left" in line
    assert stat.S_ISCHR(full.lstat().st_mode) and part_files(tmp_path) == []


@needs_root
def test_a_full_device_as_report_exits_3_and_the_data_output_is_not_kept(tmp_path, container_file):
    full = char_device(tmp_path / "full", 1, 7)
    target = tmp_path / "station.log"
    run = run_cli("decode", str(container_file), "-o", str(target), "--report", str(full), "--quiet")
    line = assert_one_line(run, 3)
    assert f"report {full}" in line
    assert not target.exists() and part_files(tmp_path) == []


def test_a_fifo_output_is_written_directly_to_its_reader(tmp_path, container_file, data):
    fifo = tmp_path / "to-uplink"
    os.mkfifo(fifo)
    received: list[bytes] = []

    def reader() -> None:
        with open(fifo, "rb") as f:  # the open waits for the writer, then reads to its end
            received.append(f.read())

    thread = threading.Thread(target=reader, daemon=True)
    thread.start()
    try:
        run = run_cli("decode", str(container_file), "-o", str(fifo), "--quiet")
        thread.join(TIMEOUT)
        assert not thread.is_alive(), "the FIFO's reader never saw the end of the data"
    finally:
        unblock_fifo_reader(fifo, thread)
    assert run.code == 0, run.err
    assert received == [data]
    assert stat.S_ISFIFO(fifo.lstat().st_mode) and part_files(tmp_path) == []


def test_a_unix_socket_output_is_connected_to_and_written(tmp_path, container_file, data):
    path = tmp_path / "uplink.sock"
    server = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    server.bind(str(path))
    server.listen(1)
    server.settimeout(TIMEOUT)
    received = bytearray()

    def serve() -> None:
        conn, _ = server.accept()
        with conn:
            conn.settimeout(TIMEOUT)
            while chunk := conn.recv(1 << 16):
                received.extend(chunk)

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    try:
        run = run_cli("decode", str(container_file), "-o", str(path), "--quiet")
        thread.join(TIMEOUT)
    finally:
        server.close()
    assert run.code == 0, run.err
    assert not thread.is_alive() and bytes(received) == data
    assert stat.S_ISSOCK(path.lstat().st_mode)


def test_dev_stdout_is_the_open_descriptor_so_an_appending_shell_redirect_is_kept(tmp_path, container, data):
    log = tmp_path / "uplink.log"
    log.write_bytes(b"earlier session\n")
    with open(log, "ab") as out:  # what `>> uplink.log` gives the command
        proc = subprocess.run([*bitmend_command(), "decode", "-o", "/dev/stdout", "--quiet"], input=container,
                              stdout=out, stderr=subprocess.PIPE, timeout=TIMEOUT)
    assert proc.returncode == 0, proc.stderr
    assert log.read_bytes().startswith(b"earlier session\n")
    assert log.read_bytes() == b"earlier session\n" + data
    assert part_files(tmp_path) == []


# ---- the same file named twice --------------------------------------------------------------------

@pytest.mark.parametrize("how", ["same path", "symlink", "hard link", "not made yet"])
def test_output_and_report_naming_one_file_is_a_usage_error_before_anything_is_written(
        tmp_path, container_file, how):
    target = tmp_path / "station.log"
    other = target
    if how != "not made yet":
        target.write_bytes(b"keep me\n")
    if how == "symlink":
        other = tmp_path / "alias.log"
        other.symlink_to(target)
    elif how == "hard link":
        other = tmp_path / "alias.log"
        os.link(target, other)
    run = run_cli("decode", str(container_file), "-o", str(target), "--report", str(other))
    line = assert_one_line(run, 2)
    assert "-o" in line and "--report" in line
    assert (target.read_bytes() == b"keep me\n") if how != "not made yet" else not target.exists()
    assert part_files(tmp_path) == []


def test_output_and_ledger_naming_one_file_is_a_usage_error(tmp_path, container_file):
    target = tmp_path / "hit.bmd"
    run = run_cli("inject", str(container_file), "--channel", "bsc:p=1e-3", "-o", str(target),
                  "--ledger", str(target))
    line = assert_one_line(run, 2)
    assert "--ledger" in line and not target.exists()


def test_a_report_into_the_file_stdout_is_redirected_to_is_a_usage_error(tmp_path, container_file):
    target = tmp_path / "both.out"
    with open(target, "wb") as out:
        proc = subprocess.run([*bitmend_command(), "decode", str(container_file), "--report", str(target)],
                              stdout=out, stderr=subprocess.PIPE, timeout=TIMEOUT)
    assert proc.returncode == 2 and b"same file" in proc.stderr
    assert target.read_bytes() == b""


# ---- signals ----------------------------------------------------------------------------------------

@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGINT, signal.SIGHUP])
def test_a_signal_during_a_slow_read_removes_the_temp_file_and_the_report_keeps_its_summary(
        tmp_path, container, signum):
    target, report = tmp_path / "station.log", tmp_path / "report.jsonl"
    proc = subprocess.Popen([*bitmend_command(), "decode", "-o", str(target), "--report", str(report)],
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            preexec_fn=restore_default_signals)
    try:
        proc.stdin.write(container[: len(container) // 3])  # a third, then the link goes quiet
        proc.stdin.flush()
        wait_for(lambda: len(part_files(tmp_path)) == 2, "the temp files of the output and the report")
        proc.send_signal(signum)
        _, err = proc.communicate(timeout=TIMEOUT)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(TIMEOUT)
    name = signal.Signals(signum).name
    assert proc.returncode == 128 + signum, err
    assert err.decode().strip() == f"bitmend: stopped by {name}"
    assert part_files(tmp_path) == [] and not target.exists()
    summary = last_object(report)
    assert summary["type"] == "summary" and summary["stopped"] == name
    assert summary["complete"] is False and summary["bytes_written"] == 0


def test_sigterm_while_injecting_keeps_a_ledger_that_says_it_was_stopped(tmp_path, container):
    ledger, target = tmp_path / "ledger.json", tmp_path / "hit.bmd"
    proc = subprocess.Popen([*bitmend_command(), "inject", "--channel", "bsc:p=1e-3", "--seed", "4",
                             "-o", str(target), "--ledger", str(ledger)],
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            preexec_fn=restore_default_signals)
    try:
        proc.stdin.write(container[: len(container) // 3])
        proc.stdin.flush()
        wait_for(lambda: len(part_files(tmp_path)) == 2, "the temp files of the output and the ledger")
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=TIMEOUT)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(TIMEOUT)
    assert proc.returncode == 143, err
    assert part_files(tmp_path) == [] and not target.exists()
    record = json.loads(ledger.read_text())
    assert record["type"] == "ledger" and record["stopped"] == "SIGTERM" and record["seed"] == 4


def blocked_in_pipe_write(pid: int) -> bool:
    """Whether a process sleeps in a write to a full pipe: Linux /proc/PID/wchan names the kernel
    function ('anon_pipe_write' or 'pipe_write', by kernel version); where wchan is hidden
    ('0' or unreadable), a sleeping process (state S in /proc/PID/stat) is taken for it."""
    try:
        where = Path(f"/proc/{pid}/wchan").read_text()
    except OSError:
        where = ""
    if "pipe_write" in where:
        return True
    if where not in ("", "0"):
        return False
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] == "S"
    except (OSError, IndexError):
        return False


def test_sigterm_while_the_reader_of_stdout_has_stalled_still_stops_at_once(tmp_path, big_container_file):
    report = tmp_path / "report.jsonl"
    proc = subprocess.Popen([*bitmend_command(), "decode", str(big_container_file), "--report", str(report)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, preexec_fn=restore_default_signals)
    try:  # nobody reads stdout: the decoder fills the pipe and waits in write()
        wait_for(lambda: part_files(tmp_path) and blocked_in_pipe_write(proc.pid), "a write blocked on the full pipe")
        proc.send_signal(signal.SIGTERM)
        code = proc.wait(TIMEOUT)
        err = proc.stderr.read().decode()
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(TIMEOUT)
        proc.stdout.close()
        proc.stderr.close()
    assert code == 143 and err.strip() == "bitmend: stopped by SIGTERM", err
    summary = last_object(report)
    # bytes_written counts the writes that returned: a write cut by the signal is not in it
    assert summary["stopped"] == "SIGTERM" and summary["complete"] is False
    assert 0 <= summary["bytes_written"] < 300_000
    assert part_files(tmp_path) == []


def test_a_second_signal_ends_a_cleanup_that_hangs_and_still_removes_the_temp_file(tmp_path):
    # a report into a FIFO whose reader never reads: the decoder fills it and waits; after
    # SIGTERM the summary line would wait for ever, and SIGHUP ends the process at once
    data = random_bytes(20_000, 93)
    source = tmp_path / "tiny-frames.bmd"
    source.write_bytes(encode_bytes(data, frame_bytes=64))  # 313 frames: report lines fill 64 KiB
    fifo, target = tmp_path / "report.fifo", tmp_path / "station.log"
    os.mkfifo(fifo)
    release = threading.Event()

    def idle_reader() -> None:
        with open(fifo, "rb"):
            release.wait(TIMEOUT)

    thread = threading.Thread(target=idle_reader, daemon=True)
    thread.start()
    proc = subprocess.Popen([*bitmend_command(), "decode", str(source), "-o", str(target), "--report", str(fifo)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, preexec_fn=restore_default_signals)
    try:
        blocked = lambda: part_files(tmp_path) and blocked_in_pipe_write(proc.pid)  # noqa: E731
        wait_for(blocked, "the report write blocked on the full FIFO")
        proc.send_signal(signal.SIGTERM)
        wait_for(blocked, "the cleanup blocked on the full FIFO")
        proc.send_signal(signal.SIGHUP)
        code = proc.wait(TIMEOUT)
    finally:
        release.set()
        if proc.poll() is None:
            proc.kill()
            proc.wait(TIMEOUT)
        proc.stdout.close()
        proc.stderr.close()
        unblock_fifo_reader(fifo, thread)
    assert code in (129, 143)  # SIGHUP's status; SIGTERM's if both were handled in one go
    assert part_files(tmp_path) == [] and not target.exists()


def test_a_signal_inside_a_deferred_block_is_raised_when_the_block_ends(monkeypatch):
    monkeypatch.setattr(outputs, "_state", outputs._SignalState())
    steps = []
    with pytest.raises(outputs.Stopped) as caught:
        with outputs.deferred_signals():
            outputs._on_signal(signal.SIGTERM, None)  # what the handler does when SIGTERM comes
            steps.append("the block ran to its end")
    assert steps == ["the block ran to its end"]
    assert caught.value.exit_code == 143 and caught.value.name == "SIGTERM"


def test_a_hangup_ignored_at_start_stays_ignored_as_under_nohup(tmp_path, container, data):
    target = tmp_path / "station.log"

    def ignore_hangup() -> None:
        restore_default_signals()
        signal.signal(signal.SIGHUP, signal.SIG_IGN)

    proc = subprocess.Popen([*bitmend_command(), "decode", "-o", str(target), "--quiet"], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, preexec_fn=ignore_hangup)
    try:
        third = len(container) // 3
        proc.stdin.write(container[:third])
        proc.stdin.flush()
        wait_for(lambda: len(part_files(tmp_path)) == 1, "the temp file of the output")
        proc.send_signal(signal.SIGHUP)
        _, err = proc.communicate(container[third:], timeout=TIMEOUT)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(TIMEOUT)
    assert proc.returncode == 0, err
    assert target.read_bytes() == data


# ---- a reader of stdout that goes away -------------------------------------------------------------

def pipe_into_head(args: list[str], stdin_file: Path) -> tuple[int, bytes, bytes]:
    """`bitmend ARGS < stdin_file | head -c 100`: (bitmend's status, head's bytes, bitmend's stderr)."""
    with open(stdin_file, "rb") as source:
        producer = subprocess.Popen([*bitmend_command(), *args], stdin=source, stdout=subprocess.PIPE,
                                    stderr=subprocess.PIPE)
    head = subprocess.Popen(["head", "-c", "100"], stdin=producer.stdout, stdout=subprocess.PIPE)
    producer.stdout.close()  # head holds the only read end now
    try:
        got, _ = head.communicate(timeout=TIMEOUT)
        _, err = producer.communicate(timeout=TIMEOUT)
    finally:
        for proc in (producer, head):
            if proc.poll() is None:
                proc.kill()
                proc.wait(TIMEOUT)
    return producer.returncode, got, err


def test_decode_into_head_stops_with_141_silently_and_the_report_has_its_summary(tmp_path, big_container_file,
                                                                               big_data):
    data = big_data
    report = tmp_path / "report.jsonl"
    code, got, err = pipe_into_head(["decode", "--report", str(report)], big_container_file)
    assert code == BROKEN_PIPE_EXIT and err == b""
    assert got == data[:100]
    lines = [json.loads(line) for line in report.read_text().splitlines()]
    summary = lines[-1]
    assert summary["type"] == "summary" and summary["stopped"] == "broken pipe"
    assert summary["complete"] is False and 0 < summary["bytes_written"] < len(data)
    assert all(line["type"] == "frame" for line in lines[:-1])
    assert part_files(tmp_path) == []


def test_inject_into_head_keeps_the_ledger_of_what_was_done(tmp_path, big_container_file):
    ledger = tmp_path / "ledger.json"
    code, got, err = pipe_into_head(["inject", "--channel", "bsc:p=1e-3", "--seed", "9", "--ledger", str(ledger)],
                                    big_container_file)
    assert code == BROKEN_PIPE_EXIT and err == b"" and len(got) == 100
    record = json.loads(ledger.read_text())
    assert record["stopped"] == "broken pipe" and record["seed"] == 9 and record["bytes_in"] > 0


def test_encode_into_head_stops_with_141_and_no_message(tmp_path, big_data):
    source = tmp_path / "gauges.log"
    source.write_bytes(big_data)
    code, got, err = pipe_into_head(["encode"], source)
    assert code == BROKEN_PIPE_EXIT and err == b"" and len(got) == 100


def test_a_fifo_whose_reader_goes_away_is_one_line_naming_it_and_exit_141(tmp_path, big_container_file):
    fifo = tmp_path / "to-uplink"
    os.mkfifo(fifo)

    def reader() -> None:
        with open(fifo, "rb") as f:
            f.read(10)  # then close: the writer's next write fails with EPIPE

    thread = threading.Thread(target=reader, daemon=True)
    thread.start()
    try:
        run = run_cli("decode", str(big_container_file), "-o", str(fifo), "--quiet")
        thread.join(TIMEOUT)
    finally:
        unblock_fifo_reader(fifo, thread)
    line = assert_one_line(run, BROKEN_PIPE_EXIT)
    assert str(fifo) in line and "broken pipe" in line


# ---- closed stdin and stdout -------------------------------------------------------------------------

def run_with_closed(fd: int, args: list[str]) -> subprocess.CompletedProcess:
    """Run bitmend with descriptor fd (0 or 1) closed, as `<&-` or `>&-` leave it."""
    keep = {0: {"stdout": subprocess.DEVNULL}, 1: {"stdin": subprocess.DEVNULL}}[fd]
    return subprocess.run([*bitmend_command(), *args], stderr=subprocess.PIPE, timeout=TIMEOUT,
                          preexec_fn=lambda: os.close(fd), **keep)


@pytest.mark.parametrize("args", [["decode"], ["encode"]])  # inspect and inject open stdin the same way
def test_a_closed_stdin_is_one_line_and_exit_3(args):
    proc = run_with_closed(0, args)
    err = proc.stderr.decode()
    assert proc.returncode == 3 and len(err.splitlines()) == 1, err
    assert "stdin" in err and "closed" in err and "internal error" not in err


@pytest.mark.parametrize("command", ["encode", "decode"])  # inject opens stdout the same way
def test_a_closed_stdout_is_one_line_and_exit_3(tmp_path, container_file, command):
    args = [command, str(container_file)] + (["--channel", "bsc:p=0.1"] if command == "inject" else [])
    proc = run_with_closed(1, args)
    err = proc.stderr.decode()
    assert proc.returncode == 3 and len(err.splitlines()) == 1, err
    assert "stdout" in err and "closed" in err and "internal error" not in err
