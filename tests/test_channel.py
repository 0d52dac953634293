"""Fault models: SPEC parsing, the streaming stages, their ledger, frame drops, and the theory they feed."""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.analysis import residual, theory
from bitmend.channel.chain import ChannelChain
from bitmend.channel.drop import NoFramesError
from bitmend.channel.events import Events
from bitmend.channel.ledger import POSITION_LIMIT
from bitmend.channel.models import BSC, BitSlip, ByteSubstitution, FrameDrop, GilbertElliott
from bitmend.channel.spec import ChannelSpecError, parse_channel, parse_channels, parse_sweep, sweep_channels
from bitmend.inject import inject, inject_bytes

from conftest import frame_spans, random_bytes


def bit_positions_that_differ(a: bytes, b: bytes) -> list[int]:
    diff = np.frombuffer(a, np.uint8) ^ np.frombuffer(b, np.uint8)
    return np.flatnonzero(np.unpackbits(diff)).tolist()


# ---- SPEC parsing ---------------------------------------------------------------------------------

def test_each_spec_parses_to_its_model_with_parameters_named_in_words():
    assert parse_channel("bsc:p=1e-3") == BSC(p=0.001)
    assert parse_channel("burst:enter=1e-4,leave=0.1,bad=0.5") == GilbertElliott(1e-4, 0.1, 0.5, 0.0)
    assert parse_channel("burst:enter=1e-4,leave=0.1,bad=0.5,good=1e-6").good == 1e-6
    assert parse_channel("bytes:p=1e-3") == ByteSubstitution(p=0.001)
    assert parse_channel("drop:p=0.01") == FrameDrop(p=0.01)
    assert parse_channel("slip:p=1e-5") == BitSlip(p=1e-5)


def test_spaces_and_upper_case_model_names_are_accepted():
    assert parse_channel("  BSC : p = 0.25 ") == BSC(p=0.25)


@pytest.mark.parametrize("spec", ["bsc:p=0.001", "burst:enter=0.0001,leave=0.1,bad=0.5,good=0",
                                  "bytes:p=0.5", "drop:p=1", "slip:p=0"])
def test_a_models_spec_parses_back_to_the_same_model(spec):
    model = parse_channel(spec)
    assert model.spec == spec
    assert parse_channel(model.spec) == model


@pytest.mark.parametrize("spec, words", [
    ("", "empty"),
    ("bsc", "parameters missing"),
    ("bsc:", "parameters missing"),
    ("gauss:p=0.1", "unknown model 'gauss'"),
    ("bsc:q=0.1", "unknown parameter 'q'"),
    ("bsc:p", "not NAME=VALUE"),
    ("bsc:p=abc", "not a number"),
    ("bsc:p=nan", "not a finite number"),
    ("bsc:p=1.5", "probability in [0, 1]"),
    ("bsc:p=-0.1", "probability in [0, 1]"),
    ("bsc:p=0.1,p=0.2", "given twice"),
    ("burst:enter=1e-3,bad=0.5", "missing leave"),
])
def test_a_bad_spec_is_one_line_that_names_the_spec_and_the_fault(spec, words):
    with pytest.raises(ChannelSpecError) as caught:
        parse_channel(spec)
    message = str(caught.value)
    assert words in message and "\n" not in message
    if spec:
        assert repr(spec.strip()) in message


def test_gilbert_elliott_properties_follow_from_its_parameters():
    m = GilbertElliott(enter=1e-4, leave=0.1, bad=0.5, good=0.001)
    assert m.mean_burst_bits == pytest.approx(10.0)
    assert m.mean_gap_bits == pytest.approx(1e4)
    assert m.bad_fraction == pytest.approx(1e-4 / (1e-4 + 0.1))
    assert m.flip_rate == pytest.approx(m.bad_fraction * 0.5 + (1 - m.bad_fraction) * 0.001)
    assert GilbertElliott(enter=0.0, leave=0.0, bad=1.0).bad_fraction == 0.0
    assert math.isinf(GilbertElliott(enter=0.1, leave=0.0, bad=1.0).mean_burst_bits)
    assert "10 bits" in m.describe()


def test_byte_substitution_changes_four_bits_on_average():
    # the 255 non-zero byte masks hold 1024 one-bits in all (each of 8 bits is set in 128 of 256 bytes)
    assert ByteSubstitution(p=1.0).flip_rate * 8 == pytest.approx(1024 / 255)


def test_only_bsc_burst_and_bytes_act_on_bits_in_place():
    assert [parse_channel(s).acts_on_bits for s in ("bsc:p=0", "burst:enter=0,leave=1,bad=0", "bytes:p=0",
                                                    "drop:p=0", "slip:p=0")] == [True, True, True, False, False]


def test_sweep_grid_is_logarithmic_and_includes_both_ends():
    name, values = parse_sweep("p=1e-4..1e-1:4")
    assert name == "p"
    assert values == pytest.approx((1e-4, 1e-3, 1e-2, 1e-1))
    assert values[0] == 1e-4 and values[-1] == 1e-1
    assert parse_sweep("bad=0.2..0.2:1") == ("bad", (0.2,))


@pytest.mark.parametrize("text", ["p=1e-4..1e-1", "p=0..0.1:3", "p=0.1..0.01:3", "p=1e-3..1e-1:x", "1e-3..0.1:3",
                                  "p=1e-3..2:3"])
def test_a_bad_sweep_is_refused_with_one_line(text):
    with pytest.raises(ChannelSpecError) as caught:
        parse_sweep(text)
    assert "\n" not in str(caught.value)


def test_sweep_sets_the_parameter_in_every_model_that_takes_it():
    models = parse_channels(["bsc:p=0.1", "burst:enter=1e-3,leave=0.1,bad=0.5", "bytes:p=0.2"])
    swept = sweep_channels(models, "p", 0.01)
    assert swept[0].p == 0.01 and swept[2].p == 0.01 and swept[1] == models[1]
    with pytest.raises(ChannelSpecError, match="none of the channels"):
        sweep_channels(models, "leak", 0.1)


# ---- events and chunking ---------------------------------------------------------------------------

def test_event_positions_do_not_depend_on_how_the_clock_is_read():
    def positions(stops):
        events = Events(0.01, np.random.default_rng(3))
        return np.concatenate([events.take(s) for s in stops]).tolist()

    whole = positions([200_000])
    assert whole == positions(list(range(997, 200_000, 997)) + [200_000])
    assert whole == positions([5, 6, 7, 50_000, 50_001, 200_000])


@settings(max_examples=40, deadline=None)
@given(p=st.floats(1e-4, 1.0), cuts=st.lists(st.integers(0, 30_000), max_size=12), seed=st.integers(0, 2 ** 32))
def test_event_positions_are_the_same_for_any_cutting_of_the_clock(p, cuts, seed):
    whole = Events(p, np.random.default_rng(seed)).take(30_000)
    events = Events(p, np.random.default_rng(seed))
    pieces = [events.take(stop) for stop in sorted(cuts) + [30_000]]
    assert np.concatenate(pieces).tolist() == whole.tolist()


def test_event_gaps_are_geometric_with_mean_one_over_p():
    p = 0.02
    pos = Events(p, np.random.default_rng(11)).take(2_000_000)
    gaps = np.diff(np.concatenate([[-1], pos]))
    assert gaps.min() >= 1
    # mean of Geometric(p) on {1, 2, ...} is 1/p; its standard deviation sqrt(1-p)/p, so the
    # mean of ~40000 gaps lies within 5 standard errors of 50
    assert abs(gaps.mean() - 1 / p) < 5 * math.sqrt(1 - p) / p / math.sqrt(gaps.size)


def test_probability_zero_never_fires_and_one_always_fires():
    assert Events(0.0, np.random.default_rng(1)).take(10 ** 9).size == 0
    assert Events(1.0, np.random.default_rng(1)).take(1000).tolist() == list(range(1000))


SPECS_FOR_CHUNKING = [
    ["bsc:p=1e-3"],
    ["burst:enter=1e-3,leave=0.05,bad=0.5,good=1e-4"],
    ["bytes:p=1e-2"],
    ["slip:p=1e-4"],
    ["bsc:p=0.2", "burst:enter=0.3,leave=0.4,bad=0.5,good=0.1", "slip:p=1e-3", "bytes:p=0.01"],
]


@pytest.mark.parametrize("specs", SPECS_FOR_CHUNKING, ids=lambda s: "+".join(x.split(":")[0] for x in s))
def test_same_seed_gives_the_same_output_whatever_the_chunk_size(specs):
    data = random_bytes(400_003, 1)
    outs = [inject_bytes(data, specs, seed=42, chunk_bytes=size) for size in (1 << 20, 4099, 777, 65536)]
    assert all(out == outs[0][0] for out, _ in outs)
    assert all(ledger.to_dict() == outs[0][1].to_dict() for _, ledger in outs)


def test_same_seed_same_output_and_another_seed_another_output():
    data = random_bytes(100_000, 2)
    first, _ = inject_bytes(data, "bsc:p=1e-3", seed=1)
    again, _ = inject_bytes(data, "bsc:p=1e-3", seed=1)
    other, _ = inject_bytes(data, "bsc:p=1e-3", seed=2)
    assert first == again != other


def test_a_model_added_at_the_end_does_not_change_what_the_earlier_ones_do():
    data = random_bytes(50_000, 3)
    alone, a = inject_bytes(data, "bsc:p=1e-2", seed=9)
    _, both = inject_bytes(data, ["bsc:p=1e-2", "bytes:p=1e-3"], seed=9)
    assert both.stages[0] == a.stages[0]


# ---- the ledger is true --------------------------------------------------------------------------------

@pytest.mark.parametrize("spec", ["bsc:p=1e-3", "bsc:p=0.3", "burst:enter=1e-3,leave=0.1,bad=0.5,good=1e-4"])
def test_ledger_flips_equal_the_bitwise_difference_between_input_and_output(spec):
    data = random_bytes(200_000, 4)
    out, ledger = inject_bytes(data, spec, seed=5, chunk_bytes=30_000)
    differ = bit_positions_that_differ(data, out)
    assert ledger.bits_flipped == len(differ) > 0
    assert ledger.bits_seen == 8 * len(data) and ledger.bytes_out == len(out) == len(data)
    positions = ledger.stages[0]["flip_positions"]
    if len(differ) <= POSITION_LIMIT:
        assert positions == differ
    else:
        assert positions is None and "positions_note" in ledger.stages[0]


def test_ledger_substitutions_are_the_bytes_that_changed_and_each_one_changed():
    data = random_bytes(300_000, 6)
    out, ledger = inject_bytes(data, "bytes:p=3e-3", seed=7, chunk_bytes=10_000)
    changed = np.flatnonzero(np.frombuffer(data, np.uint8) != np.frombuffer(out, np.uint8)).tolist()
    stage = ledger.stages[0]
    assert stage["substituted_bytes"] == changed and ledger.bytes_substituted == len(changed) > 0
    assert ledger.total("bits_changed_by_substitution") == len(bit_positions_that_differ(data, out))


def test_every_byte_value_is_substituted_by_every_other_value_about_equally():
    out, ledger = inject_bytes(bytes(200_000), "bytes:p=0.5", seed=8)
    values = np.frombuffer(out, np.uint8)
    counts = np.bincount(values, minlength=256)
    # a zero byte that is hit never stays zero: the zeros are exactly the bytes not hit
    assert counts[0] == len(out) - ledger.bytes_substituted
    hits = counts[1:]
    expected = ledger.bytes_substituted / 255
    assert hits.min() > 0.8 * expected and hits.max() < 1.2 * expected


def test_bsc_flip_count_is_consistent_with_p():
    n_bits = 8 * 1_000_000
    _, ledger = inject_bytes(bytes(n_bits // 8), "bsc:p=1e-3", seed=12)
    low, high = theory.binomial_interval(ledger.bits_flipped, n_bits, 0.999)
    assert low < 1e-3 < high


def test_burst_ledger_matches_the_chain_it_was_asked_for():
    m = GilbertElliott(enter=2e-4, leave=0.05, bad=0.4)
    _, ledger = inject_bytes(bytes(2_000_000), m, seed=13)
    stage = ledger.stages[0]
    # a long run of a stationary chain: share of bad bits, spell length and flips per bad bit
    assert stage["bits_in_bad_state"] / stage["bits_in"] == pytest.approx(m.bad_fraction, rel=0.15)
    assert stage["bits_in_bad_state"] / stage["bad_spells"] == pytest.approx(m.mean_burst_bits, rel=0.15)
    assert stage["flips_in_bad_state"] / stage["bits_in_bad_state"] == pytest.approx(m.bad, rel=0.05)
    assert stage["flips_in_good_state"] == 0


def test_burst_flips_come_in_runs_of_about_the_mean_burst_length():
    _, ledger = inject_bytes(bytes(500_000), "burst:enter=1e-4,leave=0.2,bad=1", seed=14)
    pos = np.array(ledger.stages[0]["flip_positions"])
    runs = np.split(pos, np.flatnonzero(np.diff(pos) > 1) + 1)
    lengths = np.array([len(r) for r in runs])
    # with bad = 1 every bit of a bad spell flips: spell lengths are Geometric(leave), mean 5
    assert lengths.mean() == pytest.approx(5, rel=0.2)


def test_slip_output_is_the_input_with_the_ledgers_bits_removed_and_inserted():
    data = random_bytes(20_000, 15)
    out, ledger = inject_bytes(data, "slip:p=2e-4", seed=16, chunk_bytes=3000)
    stage = ledger.stages[0]
    inserted, deleted = set(stage["inserted_before"]), set(stage["deleted"])
    assert inserted and deleted and not inserted & deleted
    # rebuild the expected bit sequence; an inserted bit's value is unknown (None)
    source = np.unpackbits(np.frombuffer(data, np.uint8)).tolist()
    expected: list[int | None] = []
    for i, bit in enumerate(source):
        if i in inserted:
            expected.append(None)
        if i not in deleted:
            expected.append(bit)
    got = np.unpackbits(np.frombuffer(out, np.uint8)).tolist()
    assert len(out) == -(-len(expected) // 8)
    assert all(e is None or e == g for e, g in zip(expected, got))
    assert got[len(expected):] == [0] * (len(got) - len(expected))  # zero padding in the last byte
    assert stage["padding_bits"] == len(got) - len(expected)
    assert ledger.slips == len(inserted) + len(deleted)


def test_positions_are_given_up_past_the_limit_but_the_counts_stay_exact():
    data = random_bytes(50_000, 17)
    out, ledger = inject_bytes(data, "bsc:p=0.1", seed=18)
    assert ledger.stages[0]["flip_positions"] is None
    assert ledger.bits_flipped == len(bit_positions_that_differ(data, out)) > POSITION_LIMIT


def test_ledger_json_names_every_total():
    _, ledger = inject_bytes(b"river gauge", "bsc:p=0.5", seed=1)
    record = ledger.to_dict()
    for key in ("seed", "channels", "bytes_in", "bytes_out", "bits_seen", "bits_flipped", "bytes_substituted",
                "frames_seen", "frames_dropped", "bits_inserted", "bits_deleted", "slips", "stages"):
        assert key in record
    assert record["seed"] == 1 and record["channels"] == ["bsc:p=0.5"]


def test_a_run_without_a_seed_records_the_seed_it_drew_and_can_be_repeated():
    data = random_bytes(10_000, 19)
    out, ledger = inject_bytes(data, "bsc:p=1e-2")
    again, _ = inject_bytes(data, "bsc:p=1e-2", seed=ledger.seed)
    assert again == out


def test_a_negative_seed_is_refused():
    with pytest.raises(ChannelSpecError, match="seed"):
        ChannelChain("bsc:p=0.1", seed=-1)


# ---- frame drops ------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def small_frames():
    data = random_bytes(40_000, 20)
    return data, bitmend.encode_bytes(data, code="hamming-15-11", depth=2, frame_bytes=1000)


def test_dropped_frames_vanish_whole_and_the_decoder_reports_exactly_them_lost(small_frames):
    data, blob = small_frames
    spans = frame_spans(blob)
    out, ledger = inject_bytes(blob, "drop:p=0.2", seed=21)
    dropped = ledger.stages[0]["dropped_frames"]
    assert ledger.total("frames_seen") == len(spans) and 0 < len(dropped) < len(spans)
    kept = [s for s in spans if s.seq not in {d["seq"] for d in dropped}]
    assert out == b"".join(blob[s.start:s.end] for s in kept)
    assert all(d["offset"] == spans[d["seq"]].start and d["bytes"] == spans[d["seq"]].size for d in dropped)
    result = bitmend.decode_bytes(out)
    lost = [f.seq for f in result.report.frames if f.status == "lost"]
    last = len(spans) - 1
    assert lost == [d["seq"] for d in dropped if d["seq"] < max(s.seq for s in kept)]
    assert result.report.summary.complete is False
    if last not in {d["seq"] for d in dropped}:
        assert result.report.summary.end_seen


def test_drop_does_not_depend_on_the_chunk_size(small_frames):
    _, blob = small_frames
    outs = {inject_bytes(blob, "drop:p=0.3", seed=22, chunk_bytes=size)[0] for size in (1 << 20, 1000, 3333)}
    assert len(outs) == 1


def test_drop_on_input_that_is_not_a_container_says_so():
    with pytest.raises(NoFramesError, match="no bitmend frame"):
        inject_bytes(random_bytes(20_000, 23), "drop:p=0.5", seed=1)


def test_drop_of_nothing_is_nothing():
    out, ledger = inject_bytes(b"", "drop:p=0.5", seed=1)
    assert out == b"" and ledger.total("frames_seen") == 0


def test_drop_after_flips_still_finds_and_drops_frames(small_frames):
    _, blob = small_frames
    out, ledger = inject_bytes(blob, ["bsc:p=1e-4", "drop:p=0.5"], seed=24)
    assert ledger.frames_dropped > 0 and len(out) < len(blob)


def test_drop_outside_inject_needs_a_frame_finder():
    with pytest.raises(ChannelSpecError, match="container"):
        ChannelChain("drop:p=0.1", seed=1)


def test_inject_streams_from_file_objects(tmp_path):
    source = tmp_path / "in.bin"
    source.write_bytes(random_bytes(70_000, 25))
    sink = io.BytesIO()
    with open(source, "rb") as f:
        ledger = inject(f, sink, "bsc:p=1e-3", seed=3, chunk_bytes=4096)
    assert sink.getvalue() == inject_bytes(source.read_bytes(), "bsc:p=1e-3", seed=3)[0]
    assert ledger.bytes_in == 70_000


# ---- theory used beside the channels ---------------------------------------------------------------------

@pytest.mark.parametrize("bits", [1, 12, 500])
def test_gilbert_elliott_hit_agrees_with_the_error_count_recursion(bits):
    # two independent computations: a 2x2 matrix power here, a forward recursion over error counts there
    args = (2e-3, 0.1, 0.5, 1e-4)
    counts = residual.gilbert_elliott_error_counts(bits, 1, *args)
    assert theory.gilbert_elliott_hit(bits, *args) == pytest.approx(1 - counts[0], rel=1e-9)


def test_gilbert_elliott_hit_of_a_clean_chain_is_zero_and_of_a_memoryless_one_is_bsc():
    assert theory.gilbert_elliott_hit(1000, 0.0, 0.0, 1.0, 0.0) == 0.0
    # with equal flip rates in both states the chain is a BSC
    assert theory.gilbert_elliott_hit(64, 0.3, 0.2, 0.01, 0.01) == pytest.approx(theory.uncoded_block_error(64, 0.01))
