"""Trial campaigns: `simulate` cut into fixed work units, run here, on a local Dask cluster,
or on an existing one, and merged in unit order.

    result = campaign("golay-24-12", 8, "bsc:p=1e-2", bits=10**9, seed=1, workers=2)

How a campaign is cut. The payload is `frames = ceil(bits / (8 * frame_bytes))` frames, as in
`simulate`. They are split into work units of `unit_frames` frames (by default as many as
make `UNIT_BITS` payload bits; the last unit may be shorter). Unit i is exactly

    simulate(code, depth, channels, unit_frames * 8 * frame_bytes, seed=unit_seed(seed, i))

where `unit_seed` splits the campaign seed with numpy's `SeedSequence` (spawn key
`(UNIT_STREAM, i)`). The cut depends on the seed, the frame size and the unit size only,
never on how many workers run it, and the counts of the units are added in unit order, so
a seed gives the same result on one worker in this process, on a local cluster of any size
and on a remote cluster. (A campaign is not the same run as one `simulate` call with the
same seed: there every frame follows the last on one continuous channel, here each unit
starts its own channel, with a Gilbert-Elliott chain in its stationary state.)

Memory does not grow with `bits`: units are generated lazily, at most `IN_FLIGHT_PER_WORKER`
per worker are submitted at a time, and results are folded into running totals as soon as
every earlier unit has arrived.

An interrupted campaign (Ctrl-C) raises `CampaignInterrupted`, a `KeyboardInterrupt` that
carries what the finished prefix of units measured (units 0..m-1: the same numbers a
campaign of that many units would give).

dask.distributed is imported only when a cluster is used.
"""

from __future__ import annotations

import logging
import sys
import threading
import uuid
from contextlib import contextmanager
from dataclasses import dataclass, field, fields, replace
from typing import Callable, Iterator, Sequence

import numpy as np

from bitmend.analysis.intervals import BatchTally
from bitmend.channel.chain import fresh_seed
from bitmend.channel.models import ChannelModel
from bitmend.channel.spec import parse_channels, parse_sweep, sweep_channels
from bitmend.codes.base import BlockCode
from bitmend.container.format import DEFAULT_FRAME_BYTES
from bitmend.errors import BitmendError
from bitmend.simulate import Measured, SimulationResult, SweepResult, check_arguments, simulate

UNIT_STREAM = 0xCA11  # spawn-key prefix of unit seeds, apart from the data's and the channel stages' keys
UNIT_BITS = 1 << 27  # default payload bits per work unit: ~1-5 s of one core, far above Dask's per-task cost
IN_FLIGHT_PER_WORKER = 4  # units submitted ahead per worker: keeps workers busy, bounds memory
CONNECT_TIMEOUT = 10.0  # seconds for a scheduler to answer (and for the client of a local cluster)

# Dask settings for a local cluster of N processes on N cores, where every cycle the cluster's
# own machinery spends is taken from a worker: no statistical profiler in the workers (a stack
# sample every 10 ms), no work stealing (units are alike), event-loop ticks and memory and
# system monitors at 1-2 s instead of 20-500 ms. Measured on a 2-core machine: the main
# process's CPU halved, two workers' steady rate about 15% higher (benchmarks/simulate_scaling.py).
QUIET_LOCAL_CLUSTER = {
    "distributed.worker.profile.enabled": False,
    "distributed.scheduler.work-stealing": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.worker.memory.monitor-interval": "1s",
    "distributed.admin.system-monitor.interval": "2s",
}

# fields of SimulationResult that add up over units; every Measured field adds its events and
# trials (and its batch sums); notes are kept where every unit agrees; every other field must
# be the same in every unit (code, depth, theory...)
ADDITIVE = ("frames", "blocks", "payload_bits", "coded_bits")
# the rate each batch tally of a SimulationResult belongs to (SimulationResult.tallies)
TALLY_OF = {"bit_error": "bits", "block_error": "blocks", "detected": "detected", "undetected": "undetected",
            "frame_error": "frames"}
EXACT = "clopper-pearson"  # Measured.method of a rate taken as binomial (BSC block and frame counts)


class CampaignError(BitmendError):
    """The cluster could not be reached or a unit failed on it (I/O class: exit 3 in the CLI)."""


class SchedulerAddressError(CampaignError, ValueError):
    """The scheduler address cannot be an address of a Dask scheduler (usage: exit 2)."""


class CampaignInterrupted(KeyboardInterrupt):
    """Ctrl-C (or another stop that is not an error) during a campaign. `partial` holds the
    merged result of the units finished in order (a SimulationResult or a SweepResult), or
    None if none had finished; `stop` is what stopped it (a KeyboardInterrupt, or the
    command line's own signal exception), to be raised again once the partial is shown."""

    def __init__(self, partial: SimulationResult | SweepResult | None, stop: BaseException) -> None:
        super().__init__("campaign interrupted")
        self.partial = partial
        self.stop = stop


def _is_stop(exc: BaseException) -> bool:
    """An interruption (KeyboardInterrupt, a signal raised as a BaseException), not an error."""
    return not isinstance(exc, (Exception, GeneratorExit, SystemExit))


# ---- the cut ------------------------------------------------------------------------------------

def unit_seed(seed: int, index: int) -> int:
    """The seed of work unit `index` of a campaign seeded `seed`: 63 bits drawn from
    SeedSequence(seed, spawn_key=(UNIT_STREAM, index)), which is how numpy spawns independent
    children, computed for one index without spawning all earlier ones. A unit can be re-run
    alone: simulate(..., bits=unit bits, seed=unit_seed(seed, index))."""
    state = np.random.SeedSequence(int(seed), spawn_key=(UNIT_STREAM, int(index))).generate_state(1, np.uint64)
    return int(state[0]) >> 1


def default_unit_frames(frame_bytes: int) -> int:
    """Frames per work unit when none is given: about UNIT_BITS payload bits."""
    return max(1, UNIT_BITS // (8 * frame_bytes))


@dataclass(frozen=True)
class Cut:
    """How a campaign's frames are split into units."""

    frames: int
    unit_frames: int

    @property
    def units(self) -> int:
        return -(-self.frames // self.unit_frames)

    def frames_of(self, index: int) -> int:
        """Frames in unit `index` (the last one may be short)."""
        return min(self.unit_frames, self.frames - index * self.unit_frames)


@dataclass(frozen=True)
class UnitJob:
    """What every unit of one campaign point shares; sent to workers once (plain data)."""

    code: str | BlockCode
    depth: int
    channels: tuple[str, ...]
    seed: int
    frame_bytes: int


def run_unit(job: UnitJob, index: int, frames: int) -> SimulationResult:
    """Run work unit `index` of `frames` frames (this is what a worker executes)."""
    return simulate(job.code, job.depth, list(job.channels), frames * 8 * job.frame_bytes,
                    unit_seed(job.seed, index), frame_bytes=job.frame_bytes)


# ---- merging ----------------------------------------------------------------------------------------

class Tally:
    """Unit results folded in unit order into running totals; out-of-order arrivals wait
    (at most the number of units in flight). Memory is constant: sums only."""

    def __init__(self, job: UnitJob, cut: Cut) -> None:
        self.job = job
        self.cut = cut
        self.merged_units = 0  # units 0..merged_units-1 are in the totals
        self.finished_units = 0  # units finished, merged or waiting
        self.finished_frames = 0
        self._waiting: dict[int, SimulationResult] = {}
        self._first: SimulationResult | None = None
        self._sums: dict[str, int] = {}
        self._counts: dict[str, tuple[int, int]] = {}  # Measured field -> (events, trials)
        self._batched: dict[str, BatchTally] = {}  # Measured field -> merged batch sums (batch-means rates)
        self._notes: list[str] = []  # the notes every unit gave alike

    def add(self, index: int, result: SimulationResult) -> None:
        self._waiting[index] = result
        self.finished_units += 1
        self.finished_frames += result.frames
        while self.merged_units in self._waiting:
            self._fold(self._waiting.pop(self.merged_units))
            self.merged_units += 1

    def _fold(self, r: SimulationResult) -> None:
        if self._first is None:
            self._first = r
            self._notes = list(r.notes)
        else:
            # per-run figures in a note (a design effect) differ from unit to unit: the merged
            # result states its own (see result())
            self._notes = [note for note in self._notes if note in r.notes]
        for f in fields(SimulationResult):
            value = getattr(r, f.name)
            if isinstance(value, Measured):
                events, trials = self._counts.get(f.name, (0, 0))
                self._counts[f.name] = (events + value.events, trials + value.trials)
                if value.method != EXACT and f.name in TALLY_OF:  # a batch-means rate: merge its batches
                    merged = self._batched.setdefault(f.name, BatchTally())
                    merged.merge(r.tallies[TALLY_OF[f.name]])
            elif f.name in ADDITIVE:
                self._sums[f.name] = self._sums.get(f.name, 0) + value
            elif f.name not in ("seed", "notes", "tallies") and value != getattr(self._first, f.name):
                # a new per-run field in SimulationResult must be taught to the merge
                raise RuntimeError(f"work units disagree on {f.name!r}: the campaign merge does not know it")

    def _measured(self, name: str) -> Measured:
        if name in self._batched:
            return Measured.from_tally(self._batched[name])
        return Measured.of(*self._counts[name])

    def running(self, name: str = "block_error") -> Callable[[], Measured | None]:
        """The interval of one rate over the units merged so far, computed when called (an
        interval loads scipy: a run whose progress nobody shows never pays for it)."""
        if name not in self._counts:
            return lambda: None
        counts = self._counts[name]
        batched = BatchTally().merge(self._batched[name]) if name in self._batched else None  # a snapshot
        return lambda: Measured.from_tally(batched) if batched is not None else Measured.of(*counts)

    def result(self, interrupted: bool = False) -> SimulationResult | None:
        """The merged result of units 0..merged_units-1, or None before the first."""
        if self._first is None:
            return None
        changes: dict = {name: self._measured(name) for name in self._counts}
        changes.update(self._sums)
        unit_bits = self.cut.unit_frames * 8 * self.job.frame_bytes
        notes = list(self._notes)
        if "block_error" in self._batched:
            notes.append("failures cluster on this channel: intervals by batch means over every unit of the "
                         f"campaign; design effect {changes['block_error'].design_effect:.2g} for the block error")
        note = (f"campaign: {self.merged_units:,} of {self.cut.units:,} work units of {self.cut.unit_frames:,} "
                f"frames ({unit_bits:,} payload bits), unit i seeded by SeedSequence({self.job.seed}, "
                f"spawn_key=({UNIT_STREAM:#x}, i))")
        if interrupted:
            note += f"; interrupted: {self._sums['frames']:,} of {self.cut.frames:,} frames measured"
        notes.append(note)
        tallies = {TALLY_OF[name]: t for name, t in self._batched.items()}
        return replace(self._first, seed=self.job.seed, notes=tuple(notes), tallies=tallies, **changes)


@dataclass(frozen=True)
class CampaignProgress:
    """A snapshot for a progress display."""

    payload_bits_done: int  # of every finished unit
    payload_bits: int  # of the whole campaign (all points of a sweep)
    units_done: int
    units: int
    running_block_error: Callable[[], Measured | None] = field(repr=False, compare=False)

    @property
    def block_error(self) -> Measured | None:
        """The running block error and its interval over the units merged in order (this
        point), None before the first; computed on demand."""
        return self.running_block_error()


# ---- runners: where units execute -----------------------------------------------------------------

class InProcess:
    """Units one after another in this process (one worker, no cluster)."""

    workers = 1

    def run(self, job: UnitJob, cut: Cut) -> Iterator[tuple[int, SimulationResult]]:
        for index in range(cut.units):
            yield index, run_unit(job, index, cut.frames_of(index))


class OnDask:
    """Units as tasks on a dask.distributed client, a bounded window at a time."""

    def __init__(self, client) -> None:
        self.client = client
        self.workers = max(1, len(client.scheduler_info().get("workers", {})))

    def run(self, job: UnitJob, cut: Cut) -> Iterator[tuple[int, SimulationResult]]:
        from distributed import as_completed

        tag = uuid.uuid4().hex[:12]  # task keys unique on a shared scheduler
        shared = self.client.scatter(job, broadcast=True, hash=False)  # the code travels once per worker
        window = IN_FLIGHT_PER_WORKER * self.workers
        following = iter(range(cut.units))
        pending: dict = {}
        done = as_completed(loop=self.client.loop)

        def submit_next() -> None:
            index = next(following, None)
            if index is not None:
                future = self.client.submit(run_unit, shared, index, cut.frames_of(index), pure=False,
                                            key=f"bitmend-unit-{tag}-{index}")
                pending[future] = index
                done.add(future)

        try:
            for _ in range(window):
                submit_next()
            for future in done:
                index = pending.pop(future)
                if future.status == "error":
                    exc = future.exception()
                    raise CampaignError(f"work unit {index} failed on the cluster: {type(exc).__name__}: {exc}")
                if future.status == "cancelled":
                    raise CampaignError(f"work unit {index} was cancelled by the cluster")
                result = future.result()
                submit_next()
                yield index, result
        finally:
            if pending:
                self.client.cancel(list(pending), force=True)
            self.client.cancel([shared], force=True)


def check_scheduler_address(address: str) -> str:
    """The address normalised (tcp:// added), or SchedulerAddressError naming what is wrong."""
    from distributed.comm import registry
    from distributed.comm.addressing import normalize_address, parse_address

    try:
        full = normalize_address(address)
        scheme, location = parse_address(full)
        backend = registry.get_backend(scheme)
        if scheme in ("tcp", "tls"):
            backend.get_address_host_port(location)
    except ValueError as exc:
        raise SchedulerAddressError(f"--scheduler {address!r} is not a Dask scheduler address ({exc}); "
                                    "expected HOST:PORT or tcp://HOST:PORT") from None
    return full


def _probe(address: str, timeout: float) -> None:
    """CampaignError at once if nothing accepts a TCP connection at a tcp:// address.

    A refused port or an unknown host is the common mistake; finding it with a plain socket
    keeps a Dask Client (which retries until its timeout, then complains again from its
    finaliser) out of it."""
    import socket

    from distributed.comm.addressing import parse_address, parse_host_port

    scheme, location = parse_address(address)
    if scheme != "tcp":
        return
    host, port = parse_host_port(location)
    try:
        with socket.create_connection((host, port), timeout=timeout):
            pass
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__  # (a timeout has no strerror)
        raise CampaignError(f"cannot reach a Dask scheduler at {address}: {reason}") from None


def _connect(address: str, timeout: float):
    """A Client on the scheduler at address, or CampaignError within about `timeout` seconds.

    The Client is made in a helper thread because its handshake can wait without end on a
    port where something other than a scheduler listens; a Client that failed half-way
    complains from its finaliser, which is then silenced (the error is reported here, once,
    and the process is expected to end soon after)."""
    from distributed import Client

    _probe(address, timeout)
    box: dict = {}

    def attempt() -> None:
        try:
            box["client"] = Client(address, timeout=timeout, set_as_default=False)
        except Exception as exc:  # reported as one line below
            box["error"] = f"{type(exc).__name__}: {exc}"

    thread = threading.Thread(target=attempt, name="bitmend-connect", daemon=True)
    thread.start()
    thread.join(timeout + 5)
    if "client" in box:
        return box["client"]
    sys.unraisablehook = lambda unraisable: None  # the failed Client's finaliser; we exit soon after
    reason = box.get("error", "no answer")
    raise CampaignError(f"cannot reach a Dask scheduler at {address} within {timeout:g} s: {reason}")


@contextmanager
def open_runner(workers: int = 1, scheduler: str | None = None,
                connect_timeout: float = CONNECT_TIMEOUT) -> Iterator[InProcess | OnDask]:
    """Where units run: this process (workers=1, no scheduler), a LocalCluster of `workers`
    processes started here and closed on the way out, or the cluster at `scheduler`.
    (Local workers are spawned processes: a script that starts them needs the usual
    `if __name__ == "__main__":` guard.)"""
    if scheduler is not None:
        address = check_scheduler_address(scheduler)
        client = _connect(address, connect_timeout)
        try:
            if not client.scheduler_info().get("workers"):
                try:
                    client.wait_for_workers(1, timeout=connect_timeout)
                except TimeoutError:
                    raise CampaignError(f"the Dask scheduler at {address} has no workers "
                                        f"(waited {connect_timeout:g} s)") from None
            yield OnDask(client)
        finally:
            client.close()
        return
    if workers < 1:
        raise ValueError(f"workers must be >= 1, got {workers}")
    if workers == 1:
        yield InProcess()
        return
    import dask
    from distributed import Client, LocalCluster

    # processes, one thread each: the trial loop holds the GIL for much of its time
    with _workers_ignore_sigint(), dask.config.set(QUIET_LOCAL_CLUSTER):
        try:
            cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                                   dashboard_address=None, silence_logs=logging.ERROR)
        except Exception as exc:  # e.g. a script calling this without `if __name__ == "__main__":`
            raise CampaignError(f"could not start {workers} local workers: {type(exc).__name__}: {exc}") from None
    with dask.config.set(QUIET_LOCAL_CLUSTER), cluster, \
            Client(cluster, timeout=connect_timeout, set_as_default=False) as client:
        yield OnDask(client)


@contextmanager
def _workers_ignore_sigint() -> Iterator[None]:
    """SIGINT ignored while the local workers are spawned, so that they inherit it ignored.

    Ctrl-C on a terminal signals the whole process group: the workers would die printing
    their own tracebacks while this process still needs them to cancel cleanly. This
    process handles the interruption and closes the cluster; its own handler is back as
    soon as the workers have started."""
    import signal

    try:
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:  # not the main thread: signals are not ours to arrange
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


# ---- campaigns ----------------------------------------------------------------------------------------

def _check(code, depth: int, models: Sequence[ChannelModel], bits: int, frame_bytes: int,
           unit_frames: int | None) -> int:
    check_arguments(models, depth, frame_bytes, bits)
    unit_frames = default_unit_frames(frame_bytes) if unit_frames is None else int(unit_frames)
    if unit_frames < 1:
        raise ValueError(f"unit_frames must be >= 1, got {unit_frames}")
    return unit_frames


def _run_point(runner: InProcess | OnDask, job: UnitJob, cut: Cut, offset_bits: int, total_bits: int,
               progress: Callable[[CampaignProgress], None] | None) -> SimulationResult:
    tally = Tally(job, cut)
    frame_bits = 8 * job.frame_bytes
    try:
        for index, result in runner.run(job, cut):
            tally.add(index, result)
            if progress is not None:
                progress(CampaignProgress(offset_bits + tally.finished_frames * frame_bits, total_bits,
                                          tally.finished_units, cut.units, tally.running()))
    except CampaignInterrupted:
        raise
    except BaseException as stop:
        if not _is_stop(stop):
            raise
        raise CampaignInterrupted(tally.result(interrupted=True), stop) from None
    return tally.result()


def campaign(code: str | BlockCode, depth: int = 1,
             channels: str | ChannelModel | Sequence[str | ChannelModel] = "bsc:p=1e-3",
             bits: int = 10 ** 7, seed: int | None = None, *, frame_bytes: int = DEFAULT_FRAME_BYTES,
             workers: int = 1, scheduler: str | None = None, unit_frames: int | None = None,
             progress: Callable[[CampaignProgress], None] | None = None,
             connect_timeout: float = CONNECT_TIMEOUT) -> SimulationResult:
    """Monte Carlo trials of `bits` payload bits cut into work units (see the module text),
    on `workers` processes here or on the Dask cluster at `scheduler`. The same seed and
    unit size give the same result whatever runs them."""
    models = parse_channels(channels)
    unit_frames = _check(code, depth, models, int(bits), frame_bytes, unit_frames)
    seed = fresh_seed() if seed is None else int(seed)
    job = UnitJob(code, depth, tuple(m.spec for m in models), seed, frame_bytes)
    cut = Cut(-(-int(bits) // (8 * frame_bytes)), unit_frames)
    with open_runner(workers, scheduler, connect_timeout) as runner:
        return _run_point(runner, job, cut, 0, cut.frames * 8 * frame_bytes, progress)


def campaign_sweep(code: str | BlockCode, depth: int,
                   channels: str | ChannelModel | Sequence[str | ChannelModel],
                   grid: str | tuple[str, Sequence[float]], bits: int = 10 ** 7, seed: int | None = None, *,
                   frame_bytes: int = DEFAULT_FRAME_BYTES, workers: int = 1, scheduler: str | None = None,
                   unit_frames: int | None = None, progress: Callable[[CampaignProgress], None] | None = None,
                   connect_timeout: float = CONNECT_TIMEOUT) -> SweepResult:
    """A campaign at each value of one channel parameter, one point after another on the
    same workers, every point with the same seed (as `simulate.sweep`). Interrupted, the
    SweepResult carried holds the finished points and the finished part of the current one."""
    name, values = parse_sweep(grid) if isinstance(grid, str) else (grid[0], tuple(float(v) for v in grid[1]))
    models = parse_channels(channels)
    sweep_channels(models, name, values[0])  # an unknown parameter fails before any work
    unit_frames = _check(code, depth, models, int(bits), frame_bytes, unit_frames)
    seed = fresh_seed() if seed is None else int(seed)
    cut = Cut(-(-int(bits) // (8 * frame_bytes)), unit_frames)
    point_bits = cut.frames * 8 * frame_bytes
    points: list[SimulationResult] = []
    with open_runner(workers, scheduler, connect_timeout) as runner:
        for i, value in enumerate(values):
            job = UnitJob(code, depth, tuple(m.spec for m in sweep_channels(models, name, value)), seed, frame_bytes)
            try:
                points.append(_run_point(runner, job, cut, i * point_bits, len(values) * point_bits, progress))
            except CampaignInterrupted as stop:
                done = points + ([stop.partial] if stop.partial is not None else [])
                raise CampaignInterrupted(SweepResult(name, tuple(values[:len(done)]), tuple(done))
                                          if done else None, stop.stop) from None
    return SweepResult(name, tuple(values), tuple(points))


# ---- a progress display ----------------------------------------------------------------------------

@contextmanager
def terminal_progress(label: str, enabled: bool = True) -> Iterator[Callable[[CampaignProgress], None]]:
    """A rich progress line on stderr (only when it is a terminal): payload bits done of all,
    the running block error with its interval, the time left. A no-op callback otherwise."""
    if not enabled or not sys.stderr.isatty():
        yield lambda snapshot: None
        return
    from rich.console import Console
    from rich.progress import Progress, TextColumn, TimeRemainingColumn

    # stdout and stderr are left alone (no redirection): local workers are spawned inside
    with Progress(TextColumn(label), TextColumn("{task.fields[bits]}"), TextColumn("{task.fields[interval]}"),
                  TimeRemainingColumn(), console=Console(stderr=True), transient=True,
                  redirect_stdout=False, redirect_stderr=False) as bar:
        task = bar.add_task(label, total=None, bits="starting", interval="")

        def show(s: CampaignProgress) -> None:
            m = s.block_error
            interval = "" if m is None else f"block error {m.rate:.2g} [{m.low:.2g}, {m.high:.2g}]"
            bar.update(task, total=s.payload_bits, completed=s.payload_bits_done, interval=interval,
                       bits=f"{s.payload_bits_done:.2g}/{s.payload_bits:.2g} bits")

        yield show
