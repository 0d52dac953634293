#!/usr/bin/env python3
"""Write an invented telemetry log of the Vessary basin gauge network.

Everything here is made up: the river, the stations, the readings and the events. The log
is realistic in shape (slow daily cycles, a rain-driven rise that travels downstream,
solar-charged batteries, a radio link that fades), so it is useful demo data for bitmend.

    python samples/make_gauge_log.py                       # samples/gauge-telemetry.log, ~300 KB
    python samples/make_gauge_log.py --size-kb 50 --seed 3 -o /tmp/small.log
    python samples/make_gauge_log.py -o -                  # to stdout

The output depends only on the seed and the size, and a smaller size gives a prefix of a
larger one (same seed). Standard library only.

From Python:

    import importlib.util
    spec = importlib.util.spec_from_file_location("make_gauge_log", "samples/make_gauge_log.py")
    mod = importlib.util.module_from_spec(spec); spec.loader.exec_module(mod)
    data = mod.make_log(300 * 1024, seed=7)
"""

import argparse
import itertools
import math
import random
import sys
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Iterator

DEFAULT_SEED = 7
DEFAULT_SIZE_KB = 300
DEFAULT_OUTPUT = Path(__file__).resolve().parent / "gauge-telemetry.log"

START = datetime(2024, 10, 7, 0, 0, 0, tzinfo=timezone.utc)
INTERVAL_S = 600  # each station reports every 10 minutes
HORIZON_DAYS = 400  # the storm calendar covers far more than any sample needs
HUB = "HUB00"


@dataclass(frozen=True)
class Station:
    """One gauge. km is distance down the river from the source; datum is the gauge zero
    in metres above sea level; base is the dry-weather stage; the rating curve gives
    flow = a * (stage - h0) ** b; rise is metres of stage per millimetre of basin rain."""

    sid: str
    name: str
    km: float
    datum: float
    base: float
    h0: float
    a: float
    b: float
    rise: float
    lag_h: float  # hours from rain to the start of the response here
    peak_h: float  # hours from the start of the response to the peak
    temp: float  # mean water temperature, deg C
    rssi: float  # mean received signal, dBm
    weak_battery: bool = False


# An invented river: the Vessary, from the Corvel moors to the sea at Kestrel Quay.
STATIONS: tuple[Station, ...] = (
    Station("VSY01", "Corvel Head", 2.4, 311.20, 0.214, 0.05, 3.1, 1.9, 0.026, 0.8, 2.5, 7.6, -101.0),
    Station("VSY02", "Brisk Hollow", 7.9, 268.45, 0.305, 0.08, 4.4, 1.8, 0.028, 1.5, 3.0, 7.9, -97.0),
    Station("VSY03", "Tamsin Weir", 13.1, 231.90, 0.388, 0.11, 6.2, 1.8, 0.030, 2.4, 3.5, 8.2, -84.0),
    Station("VSY04", "Ollerby Ford", 19.6, 190.05, 0.452, 0.12, 8.0, 1.7, 0.027, 3.5, 4.0, 8.6, -89.0),
    Station("VSY05", "Quarrel Bridge", 26.2, 158.70, 0.531, 0.14, 10.5, 1.7, 0.025, 4.6, 4.5, 8.9, -92.0),
    Station("VSY06", "Stonecrop Narrows", 31.8, 132.35, 0.604, 0.15, 12.1, 1.6, 0.031, 5.5, 5.0, 9.1, -105.5),
    Station("VSY07", "Lantern Reach", 38.5, 104.10, 0.672, 0.17, 15.3, 1.6, 0.024, 6.8, 5.5, 9.4, -86.0),
    Station("VSY08", "Mirewick Lock", 44.0, 81.55, 0.760, 0.19, 18.0, 1.6, 0.022, 7.9, 6.0, 9.7, -79.0),
    Station("VSY09", "Fallowmere Mill", 51.3, 60.20, 0.815, 0.21, 21.4, 1.5, 0.021, 9.2, 6.5, 10.0, -94.0, True),
    Station("VSY10", "Sedge Bend", 57.7, 41.85, 0.903, 0.24, 24.9, 1.5, 0.019, 10.4, 7.0, 10.3, -99.0),
    Station("VSY11", "Pebbleworth", 63.0, 22.40, 0.984, 0.26, 28.2, 1.5, 0.018, 11.5, 7.5, 10.5, -88.0),
    Station("VSY12", "Kestrel Quay", 68.4, 4.15, 1.122, 0.30, 33.0, 1.4, 0.016, 12.6, 8.0, 10.8, -82.0),
)
FLOOD_WATCH_ABOVE_BASE = 0.75  # m above dry-weather stage raises a flood watch
FLOOD_WATCH_HYSTERESIS = 0.10  # m below the watch level before it is lowered
BATTERY_LOW_V = 11.90
BATTERY_OK_V = 12.30
LINK_RETRY_DBM = -110.0


@dataclass(frozen=True)
class Storm:
    start_h: float  # hours after START
    depth_mm: float
    hours: float


def storm_calendar(seed: int) -> list[Storm]:
    """Storms over the whole horizon, drawn once from their own random stream so the
    calendar does not depend on how much log is written. The first storm comes early and
    is heavy enough to raise flood watches, so even a short sample shows one."""
    rng = random.Random(f"storms-{seed}")
    storms = [Storm(rng.uniform(6.0, 14.0), rng.uniform(30.0, 42.0), rng.uniform(4.0, 9.0))]
    t = storms[0].start_h
    while t < HORIZON_DAYS * 24:
        t += rng.expovariate(1 / 60.0)  # about one storm every two and a half days
        storms.append(Storm(t, rng.choice((3.0, 6.0, 10.0, 18.0, 26.0)) * rng.uniform(0.7, 1.3),
                            rng.uniform(2.0, 12.0)))
    return storms


def response(hours_since: float, peak_h: float) -> float:
    """Unit response of a gauge to rain: 0 before, rises to 1 at peak_h, then recedes."""
    if hours_since <= 0:
        return 0.0
    x = hours_since / peak_h
    return x * math.exp(1.0 - x)


def daylight(hour: float) -> float:
    """0 at night, rising to 1 at solar noon (13:00 local, taken as UTC here)."""
    return max(0.0, math.sin(math.pi * (hour - 7.0) / 12.0))


class StationState:
    """What a station's logger remembers between readings."""

    def __init__(self, station: Station, rng: random.Random) -> None:
        self.station = station
        self.count = rng.randrange(1000, 9000)  # message counter carried over from earlier days
        self.charge = rng.uniform(0.7, 0.9)  # battery state of charge, 0..1
        self.cloud_day = -1
        self.cloud = 1.0
        self.flood_watch = False
        self.battery_low = False
        self.wiper_offset_h = rng.uniform(0.0, 6.0)
        self.fade_phase = rng.uniform(0.0, 2 * math.pi)


def cloud_cover(state: StationState, when: datetime, rng: random.Random) -> float:
    """Share of full sun reaching the panel today (one draw per station per day)."""
    day = when.toordinal()
    if day != state.cloud_day:
        state.cloud_day = day
        state.cloud = rng.uniform(0.35, 1.0)
    return state.cloud


def readings(seed: int) -> Iterator[str]:
    """Log lines in time order, without end; the caller stops when it has enough."""
    storms = storm_calendar(seed)
    rng = random.Random(f"readings-{seed}")
    states = [StationState(s, rng) for s in STATIONS]
    stagger = INTERVAL_S // len(STATIONS)  # stations report in turn, not all at once
    step = 0
    while True:
        slot_start = START + timedelta(seconds=step * INTERVAL_S)
        if step % 6 == 0:  # hourly digest from the base station
            stamp = slot_start.strftime("%Y-%m-%dT%H:%M:%SZ")
            watches = sum(st.flood_watch for st in states)
            reporting = len(STATIONS) - (1 if rng.random() < 0.04 else 0)
            yield (f"{stamp} {HUB} EVENT hourly digest sent ({reporting}/{len(STATIONS)} stations reporting, "
                   f"{watches} flood watch{'es' if watches != 1 else ''} active)")
        for index, state in enumerate(states):
            when = slot_start + timedelta(seconds=index * stagger + rng.randint(0, 9))
            yield from station_lines(state, when, storms, rng)
        step += 1


def station_lines(state: StationState, when: datetime, storms: list[Storm],
                  rng: random.Random) -> Iterator[str]:
    s = state.station
    hours = (when - START).total_seconds() / 3600.0
    hour_of_day = when.hour + when.minute / 60.0
    stamp = when.strftime("%Y-%m-%dT%H:%M:%SZ")

    # stage: dry-weather level, a small daily cycle, and every storm's travelling response
    rain_rise = 0.0
    raining = False
    for storm in storms:
        if storm.start_h > hours:
            break
        since = hours - storm.start_h - s.lag_h
        # a storm's rain arrives spread over its duration: average the response over it
        spread = sum(response(since - f * storm.hours, s.peak_h + 0.3 * storm.hours) for f in (0.0, 0.5, 1.0)) / 3
        rain_rise += s.rise * storm.depth_mm * spread
        raining = raining or storm.start_h <= hours <= storm.start_h + storm.hours
    diurnal = -0.006 * math.sin(2 * math.pi * (hour_of_day - 9.0) / 24.0)
    stage = s.base + rain_rise + diurnal + rng.gauss(0.0, 0.0015)
    flow = s.a * max(stage - s.h0, 0.0) ** s.b

    # water temperature: warmest late afternoon, cooled a little by rain water
    temp = (s.temp + 0.6 * math.sin(2 * math.pi * (hour_of_day - 10.0) / 24.0)
            - 0.8 * min(rain_rise, 1.5) + rng.gauss(0.0, 0.04))

    # battery: state of charge rises with sun (less under cloud and rain) and falls with
    # the logger's draw; the voltage shows the charge, lifted while the panel charges.
    # One station has an ageing battery: lower resting voltage, so it sags before dawn.
    sun = daylight(hour_of_day) * cloud_cover(state, when, rng) * (0.3 if raining else 1.0)
    state.charge = min(1.0, max(0.0, state.charge + 0.021 * sun - 0.0036))
    rest = 11.28 if s.weak_battery else 11.62
    batt = rest + 1.15 * state.charge + 0.75 * sun + rng.gauss(0.0, 0.01)

    # radio: a slow fade, rain fade, and noise
    rssi = (s.rssi + 3.0 * math.sin(2 * math.pi * hours / 17.0 + state.fade_phase)
            - (4.0 if raining else 0.0) + rng.gauss(0.0, 2.0))

    state.count = (state.count + 1) % 65536
    if rssi < LINK_RETRY_DBM:
        yield f"{stamp} {s.sid} EVENT radio link retry (attempt 2, rssi {rssi:.0f}dBm)"
    yield (f"{stamp} {s.sid} n={state.count:05d} stage={stage:.3f}m flow={flow:.2f}m3/s "
           f"temp={temp:.1f}C batt={batt:.2f}V rssi={rssi:.0f}dBm")

    # status events
    phase = (hours - state.wiper_offset_h) % 6.0
    if phase < INTERVAL_S / 3600.0:
        yield f"{stamp} {s.sid} EVENT sensor wiper cycle ({rng.uniform(3.5, 5.5):.1f} s)"
    watch_level = s.base + FLOOD_WATCH_ABOVE_BASE
    if not state.flood_watch and stage > watch_level:
        state.flood_watch = True
        yield f"{stamp} {s.sid} EVENT flood watch raised (stage {stage:.3f}m above {watch_level:.2f}m)"
    elif state.flood_watch and stage < watch_level - FLOOD_WATCH_HYSTERESIS:
        state.flood_watch = False
        yield f"{stamp} {s.sid} EVENT flood watch lowered (stage {stage:.3f}m)"
    if not state.battery_low and batt < BATTERY_LOW_V:
        state.battery_low = True
        yield f"{stamp} {s.sid} EVENT battery low ({batt:.2f}V), sampling continues"
    elif state.battery_low and batt > BATTERY_OK_V:
        state.battery_low = False
        yield f"{stamp} {s.sid} EVENT battery recovered ({batt:.2f}V)"
    if rng.random() < 0.0015:
        yield f"{stamp} {s.sid} EVENT logger clock corrected by {rng.choice('+-')}{rng.uniform(0.2, 1.9):.1f} s"
    if rng.random() < 0.0008:
        yield f"{stamp} {s.sid} EVENT enclosure door opened (maintenance visit)"


def preamble(seed: int) -> list[str]:
    lines = [
        "# Vessary basin gauge network: telemetry export (INVENTED DATA for bitmend demos)",
        f"# generator samples/make_gauge_log.py, seed {seed}; times UTC; stage above gauge zero",
        "# fields: time station n=message-counter stage=m flow=m3/s temp=water-C batt=V rssi=dBm",
    ]
    for s in STATIONS:
        lines.append(f"# station {s.sid} {s.name}, river km {s.km:.1f}, gauge zero {s.datum:.2f} m")
    return lines


def make_log(size_bytes: int, seed: int = DEFAULT_SEED) -> bytes:
    """The log as bytes: whole lines only, at most size_bytes (ASCII, newline-terminated)."""
    if size_bytes < 0:
        raise ValueError(f"size must be >= 0 bytes, got {size_bytes}")
    out: list[bytes] = []
    used = 0
    for line in itertools.chain(preamble(seed), readings(seed)):
        encoded = (line + "\n").encode("ascii")
        if used + len(encoded) > size_bytes:
            break
        out.append(encoded)
        used += len(encoded)
    return b"".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write an invented river-gauge telemetry log (demo data).")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help=f"random seed (default {DEFAULT_SEED})")
    parser.add_argument("--size-kb", type=float, default=DEFAULT_SIZE_KB,
                        help=f"size limit in KiB; whole lines only (default {DEFAULT_SIZE_KB})")
    parser.add_argument("-o", "--output", default=str(DEFAULT_OUTPUT),
                        help="output file, or - for stdout (default samples/gauge-telemetry.log)")
    args = parser.parse_args(argv)
    if args.size_kb < 0:
        parser.error("--size-kb must be >= 0")
    data = make_log(int(args.size_kb * 1024), args.seed)
    if args.output == "-":
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
    else:
        Path(args.output).write_bytes(data)
        print(f"wrote {len(data):,} bytes to {args.output}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
