"""Custom codes from a definition file: parsing and its errors, properties, decoding, and
the code travelling inside the container (code id 0)."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest

import bitmend
from bitmend.codes.catalog import get_code
from bitmend.codes.custom import parse_code_definition
from bitmend.codes.linear import CodeDefinitionError
from bitmend.container import format as fmt
from bitmend.interleave import decode_segment, encode_segment
from bitmend.properties import code_profile
from bitmend.report import CLEAN

from conftest import flip_run, random_bytes, run_cli

CATALOG_H74 = get_code("hamming-7-4").H
# the same Hamming (7, 4) code with its first two message columns swapped: an equivalent code
# that is not the catalog's (a different P), so it travels in the frames as a defined code
GAUGE_H74 = CATALOG_H74[:, [1, 0, 2, 3, 4, 5, 6]]


def _rows(matrix) -> str:
    return "\n".join("".join(map(str, row)) for row in matrix)


def _write(tmp_path, name: str, text: str):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.fixture
def h74_file(tmp_path):
    """The catalog hamming-7-4 parity-check matrix, as a user would write it down."""
    return _write(tmp_path, "gauge-h74.txt", "# uplink of the Cinder Bend gauge\nparity-check\n"
                  + _rows(CATALOG_H74) + "   # last row\n")


@pytest.fixture
def gauge_file(tmp_path):
    """A Hamming (7, 4) code outside the catalog (GAUGE_H74), as a user would write it down."""
    return _write(tmp_path, "gauge-h74-swapped.txt", "# uplink of the Cinder Bend gauge\nparity-check\n"
                  + _rows(GAUGE_H74) + "   # last row\n")


def _spans(container: bytes) -> list[tuple[int, fmt.FrameHeader]]:
    """(offset, header) of every frame of an undamaged container, by walking the headers."""
    out, offset = [], 0
    while offset < len(container):
        header = fmt.decode_header(container[offset + 8: offset + 8 + fmt.HEADER_BYTES])
        assert header is not None
        out.append((offset, header))
        offset += header.frame_bytes
    assert offset == len(container)
    return out


# ---- the same code as the catalog's -------------------------------------------------------------

def test_custom_file_with_the_hamming_7_4_matrix_has_the_catalog_codes_properties(h74_file):
    custom = bitmend.load_code_file(h74_file)
    catalog = get_code("hamming-7-4")
    assert (custom.n, custom.k, custom.d, custom.t, custom.detects) == (7, 4, 3, 1, 1)
    assert np.array_equal(custom.P, catalog.P)
    assert custom.weight_distribution.counts == catalog.weight_distribution.counts
    mine, theirs = code_profile(custom).to_dict(), code_profile(catalog).to_dict()
    for key in ("n", "k", "d", "t", "detects", "perfect", "weight_distribution", "G", "H", "bounds", "bsc"):
        assert mine[key] == theirs[key], key
    assert mine["source"] == "custom" and theirs["source"] == "catalog"


@pytest.mark.parametrize("form", ["generator text", "generator json", "parity-check json", "row strings json"])
def test_every_form_of_the_definition_gives_the_same_code(form, tmp_path):
    catalog = get_code("hamming-7-4")
    if form == "generator text":
        text = "generator\n" + "\n".join(" ".join(map(str, row)) for row in catalog.G)
    elif form == "generator json":
        text = json.dumps({"generator": catalog.G.tolist(), "name": "gauge-7-4"})
    elif form == "parity-check json":
        text = json.dumps({"parity_check": catalog.H.tolist()})
    else:
        text = json.dumps({"parity_check": ["".join(map(str, row)) for row in catalog.H]})
    code = bitmend.load_code_file(_write(tmp_path, "code.def", text))
    assert np.array_equal(code.P, catalog.P)
    assert code.name == ("gauge-7-4" if form == "generator json" else "custom-7-4")


def test_custom_hamming_7_4_decodes_every_received_word_as_the_catalog_code_does(h74_file):
    custom, catalog = bitmend.load_code_file(h74_file), get_code("hamming-7-4")
    words = ((np.arange(128)[:, None] >> np.arange(6, -1, -1)) & 1).astype(np.uint8)  # all 2^7 words
    for a, b in zip(custom.decode(words), catalog.decode(words)):
        assert np.array_equal(a, b)
    # and through the stream path, on a damaged interleaved segment
    message = random_bytes(300, 4)
    coded = bytearray(encode_segment(custom, 5, message))
    assert bytes(coded) == encode_segment(catalog, 5, message)
    damaged = flip_run(bytes(coded), 77, 5)
    mine, theirs = decode_segment(custom, 5, damaged, 300), decode_segment(catalog, 5, damaged, 300)
    assert mine[0] == theirs[0] == message and np.array_equal(mine[1], theirs[1])


def test_a_generator_whose_information_set_is_not_first_is_brought_to_an_equivalent_systematic_code(tmp_path):
    # the three parity columns, then the fourth message column: these four columns sum to
    # zero (rank 3), so they cannot carry the message and the columns are reordered; the
    # code keeps its weights and distance
    catalog = get_code("hamming-7-4")
    G = catalog.G[:, [4, 5, 6, 3, 0, 1, 2]]
    code = bitmend.load_code_file(_write(tmp_path, "g.txt", "generator\n" + _rows(G)))
    assert code.column_order != tuple(range(7))
    assert code.weight_distribution.counts == catalog.weight_distribution.counts and code.d == 3
    assert "columns reordered" in "\n".join(code_profile(code).render())


# ---- malformed definitions: one clear line each -----------------------------------------------------

MALFORMED = {
    "empty.txt": ("# nothing here\n\n", "empty"),
    "no-kind.txt": ("1110100\n1101010\n", "matrix kind"),
    "bad-kind.txt": ("parity\n1110100\n", "matrix kind"),
    "bad-char.txt": ("generator\n1002\n", "only 0 and 1"),
    "ragged.txt": ("parity-check\n1110100\n110101\n", "rows above have 7"),
    "no-rows.txt": ("generator\n", "no rows"),
    "dependent.txt": ("generator\n1100\n0110\n1010\n", "dependent"),
    "square.txt": ("generator\n100\n010\n001\n", "fewer rows than columns"),
    "too-many-parity.txt": ("parity-check\n" + "\n".join("1" * i + "0" * (30 - i) for i in range(1, 22)), "n - k"),
    "too-long-k.txt": ("parity-check\n" + "1" * 70 + "\n", "k must be"),
    "bad.json": ('{"generator": [[1, 0, 1], [0, 1', "not valid JSON"),
    "both.json": ('{"generator": [[1, 0, 1]], "parity_check": [[1, 1, 0]]}', "exactly one"),
    "non-binary.json": ('{"generator": [[1, 0, 2]]}', "0/1"),
    "catalog-name.json": ('{"generator": [[1, 1, 1]], "name": "rep-3"}', "catalog code"),
}


@pytest.mark.parametrize("name", sorted(MALFORMED))
def test_malformed_definition_gives_one_clear_error_line_and_exit_2(name, tmp_path):
    text, words = MALFORMED[name]
    path = _write(tmp_path, name, text)
    with pytest.raises(CodeDefinitionError) as caught:
        bitmend.load_code_file(path)
    message = str(caught.value)
    assert "\n" not in message and str(path) in message and words in message
    run = run_cli("codes", "show", "--code-file", str(path))
    assert run.code == 2, run.err
    assert len(run.err_lines) == 1 and run.err_lines[0] == f"bitmend: {message}"
    assert "Traceback" not in run.err and run.out == b""


def test_binary_file_as_definition_is_refused_with_one_line(tmp_path):
    path = tmp_path / "noise.bin"
    path.write_bytes(bytes(range(200, 256)) * 4)
    run = run_cli("encode", "--code-file", str(path), stdin=b"stage 2.1 m\n")
    assert run.code == 2 and len(run.err_lines) == 1 and "not a text file" in run.err
    assert run.out == b""


def test_missing_definition_file_is_an_io_error_exit_3(tmp_path):
    run = run_cli("codes", "show", "--code-file", str(tmp_path / "absent.txt"))
    assert run.code == 3 and len(run.err_lines) == 1 and "Traceback" not in run.err


def test_catalog_name_and_code_file_together_are_refused(h74_file):
    run = run_cli("encode", "--code", "hamming-7-4", "--code-file", str(h74_file), stdin=b"x")
    assert run.code == 2 and len(run.err_lines) == 1


# ---- the definition inside the container ------------------------------------------------------------

def test_container_with_a_custom_code_decodes_with_no_extra_file(gauge_file, gauge_log):
    code = bitmend.load_code_file(gauge_file)
    blob = bitmend.encode_bytes(gauge_log, code=code, depth=6, frame_bytes=700)
    spans = _spans(blob)
    assert len(spans) > 3 and all(h.code_id == fmt.CUSTOM_CODE_ID and h.shape == (4, 3) for _, h in spans)
    result = bitmend.decode_bytes(blob)  # a fresh reader: no code given, none needed
    assert result.data == gauge_log and result.report.complete


def test_custom_container_survives_a_burst_on_one_frames_header_and_definition(gauge_file, gauge_log):
    code = bitmend.load_code_file(gauge_file)
    blob = bytearray(bitmend.encode_bytes(gauge_log, code=code, depth=6, frame_bytes=700))
    offset, header = _spans(bytes(blob))[2]
    # marker, header and the leading definition block all wiped: the copies carry the frame
    blob[offset: offset + 8 + fmt.HEADER_BYTES + header.definition_bytes] = random_bytes(
        8 + fmt.HEADER_BYTES + header.definition_bytes, 5)
    result = bitmend.decode_bytes(bytes(blob))
    assert result.data == gauge_log and result.report.complete
    assert all(f.status == CLEAN for f in result.report.frames)


def test_custom_container_survives_a_burst_on_the_leading_header_alone_through_the_cli(gauge_file, gauge_log):
    encoded = run_cli("encode", "--code-file", str(gauge_file), "--depth", "4", "--frame-bytes", "512",
                      stdin=gauge_log)
    assert encoded.code == 0, encoded.err
    blob = bytearray(encoded.out)
    offset, _ = _spans(bytes(blob))[1]
    blob = flip_run(bytes(blob), 8 * (offset + 8), 8 * fmt.HEADER_BYTES)  # the whole leading header
    decoded = run_cli("decode", stdin=blob)
    assert decoded.code == 0, decoded.err
    assert decoded.out == gauge_log


def test_frame_whose_two_definition_blocks_are_hit_is_read_unchecked_and_noted(gauge_file):
    code = bitmend.load_code_file(gauge_file)
    data = random_bytes(900, 8)
    blob = bytearray(bitmend.encode_bytes(data, code=code, depth=3, frame_bytes=300))
    offset, header = _spans(bytes(blob))[1]
    size = header.definition_bytes
    lead = offset + 8 + fmt.HEADER_BYTES
    trail = offset + header.frame_bytes - fmt.HEADER_BYTES - size
    blob[lead: lead + size] = bytes(size)
    blob[trail: trail + size] = bytes(size)
    result = bitmend.decode_bytes(bytes(blob))
    frame = result.report.frames[1]
    # nothing could be corrected, every block is flagged; the payload CRC still speaks for the data
    assert frame.failed_count == frame.blocks > 0 and frame.crc_ok
    assert result.data == data
    assert any("code definition" in note for note in result.report.summary.notes)


def test_custom_frames_record_k_and_n_minus_k_in_the_length_field():
    code = parse_code_definition("parity-check\n" + _rows(GAUGE_H74))
    header = fmt.FrameHeader.for_defined_code(code, 9, 5, 1000, last=True)
    record = header.record()
    assert record[:4] == bytes([2, 1, 0, 9])
    # (k - 1) << 26 | (r - 1) << 21 | length = 3 << 26 | 2 << 21 | 1000, at bytes 22..25 in version 2
    assert int.from_bytes(record[22:26], "big") == (3 << 26) | (2 << 21) | 1000
    v1 = fmt.FrameHeader(fmt.CUSTOM_CODE_ID, 9, 5, 1000, True, 1, (4, 3)).record()
    assert int.from_bytes(v1[8:12], "big") == (3 << 26) | (2 << 21) | 1000  # version 1: bytes 8..11
    decoded = fmt.decode_header(fmt.encode_header(header))
    assert decoded == header and decoded.shape == (4, 3) and decoded.defined_code is None
    assert decoded.frame_bytes == header.frame_bytes == len(fmt.encode_frame(header, bytes(1000)))


@pytest.mark.parametrize("version, size", [(2, 60), (1, 33)])
def test_definition_block_survives_any_burst_the_header_survives(gauge_file, version, size):
    # version 2: 20 golay-24-12 codewords, as the header (60-bit bursts); version 1: 11 (33 bits)
    code = bitmend.load_code_file(gauge_file)
    block = fmt.encode_definition(code, version)
    assert len(block) == fmt.definition_coded_bytes(4, 3, version) == size
    for start in range(0, 8 * len(block) - size, 17):
        assert np.array_equal(fmt.decode_definition(flip_run(block, start, size), (4, 3), version).P, code.P)


def test_hostile_custom_header_values_are_refused():
    too_wide = fmt.FrameHeader(fmt.CUSTOM_CODE_ID, 8, 0, 10, shape=(4, 3))
    record = bytearray(too_wide.record())
    record[22:26] = ((3 << 26) | (25 << 21) | 10).to_bytes(4, "big")  # n - k = 26 > 20
    record[26:] = fmt.crc32c(bytes(record[:26])).to_bytes(4, "big")
    coded = encode_segment(fmt.header_code(), fmt.HEADER_DEPTH, bytes(record))
    with pytest.raises(fmt.HeaderError, match="n - k"):
        fmt.decode_header(coded)


def test_catalog_frames_are_byte_identical_to_the_format_documents_worked_examples():
    # the two containers printed in docs/FORMAT.md ("Worked example"), format version 2,
    # written with the stream identity 0x09A7E5C0FFEE2026 given (it is random otherwise)
    stream = 0x09A7E5C0FFEE2026
    worked = bytes.fromhex(
        "a4c95bdd8544ae531a0010a0000a00550007160050e004970012c0020c0061d002570021400e2700"
        "65000bef006f400c5400c77009f9002e6005780009b00ad400edc00866f198f78a99bc66a8b0032f"
        "0b007865e25663d9bc66a8b00323cb703294c9667a74cc019a655b5a401a0010a0000a0055000716"
        "0050e004970012c0020c0061d002570021400e270065000bef006f400c5400c77009f9002e600578"
        "0009b00ad400edc008")
    empty = bytes.fromhex(
        "a4c95bdd8544ae531a0010a0010a00150003160060e006970032c0030c0071d00257005140012700"
        "250005ef001f40035400777002f9002e6001780029b007d4002dc007000000000000001a0010a001"
        "0a00150003160060e006970032c0030c0071d00257005140012700250005ef001f40035400777002"
        "f9002e6001780029b007d4002dc007")
    assert bitmend.encode_bytes(b"gauge 7 stage 1.42m", code="hamming-7-4", depth=1, stream_id=stream) == worked
    assert bitmend.encode_bytes(b"", code="hamming-7-4", depth=1, stream_id=stream) == empty
    # a catalog code passed as an object is written by its catalog id, not defined in the frame
    assert bitmend.encode_bytes(b"gauge 7 stage 1.42m", code=get_code("hamming-7-4"), depth=1,
                                stream_id=stream) == worked


def test_version_1_worked_examples_still_decode_to_their_payloads():
    # the two version 1 containers docs/FORMAT.md printed before version 2 (kept there)
    worked = bytes.fromhex(
        "a4c95bdd8544ae5300a0140220000c00c0150e0000090400ea0882b82f0b405c0b8770de0a015052"
        "0066f198f78a99bc66a8b0032f0b007865e25663d9bc66a8b00323cb703294c9667a74cc019a655b"
        "5a4000a0140220000c00c0150e0000090400ea0882b82f0b405c0b8770de0a01505200")
    empty = bytes.fromhex(
        "a4c95bdd8544ae5300c01c0320100e00c02d0100000100006a0080b83703401c1383705e0600502a"
        "070000000000000000c01c0320100e00c02d0100000100006a0080b83703401c1383705e0600502a07")
    for blob, payload in ((worked, b"gauge 7 stage 1.42m"), (empty, b"")):
        result = bitmend.decode_bytes(blob)
        assert result.data == payload and result.report.complete
        assert result.report.frames[0].stream is None  # version 1 frames name no stream


def test_open_writes_and_reads_a_custom_code_stream(gauge_file, tmp_path, gauge_log):
    code = bitmend.load_code_file(gauge_file)
    target = tmp_path / "gauges.bmd"
    with bitmend.open(target, "wb", code=code, depth=8, frame_bytes=1000) as f:
        f.write(gauge_log[:2500])
        f.flush()
        f.write(gauge_log[2500:])
    with bitmend.open(target, "rb") as f:
        assert f.read() == gauge_log
        assert f.report.complete


def test_truncated_custom_stream_delivers_the_whole_frames(gauge_file):
    code = bitmend.load_code_file(gauge_file)
    data = random_bytes(1000, 12)
    blob = bitmend.encode_bytes(data, code=code, depth=2, frame_bytes=250)
    spans = _spans(blob)
    cut = spans[2][0] + 60  # inside frame 2's definition block
    result = bitmend.decode_bytes(blob[:cut])
    assert result.data[:500] == data[:500]
    assert not result.report.complete


def test_custom_code_whose_frames_would_exceed_the_reader_limit_is_refused():
    rep9 = parse_code_definition(json.dumps({"generator": [[1] * 9]}))
    with pytest.raises(ValueError, match="smaller frame size"):
        bitmend.encode_bytes(b"x", code=rep9, depth=1, frame_bytes=fmt.MAX_PAYLOAD_BYTES)
    assert bitmend.decode_bytes(bitmend.encode_bytes(b"x" * 100, code=rep9, depth=3)).data == b"x" * 100


def test_inspect_names_a_custom_code_by_its_shape(gauge_file):
    blob = bitmend.encode_bytes(b"stage 1.9 m\n" * 40, code=bitmend.load_code_file(gauge_file), depth=2)
    run = run_cli("inspect", "--json", stdin=blob)
    assert run.code == 0, run.err
    frames = [json.loads(line) for line in run.out.decode().splitlines()][:-1]
    assert [f["code"] for f in frames] == ["custom-7-4"]


def test_simulate_accepts_a_code_file(gauge_file):
    run = run_cli("simulate", "--code-file", str(gauge_file), "--channel", "bsc:p=1e-2", "--bits", "20000",
                  "--depth", "1", "--seed", "3", "--json")
    assert run.code == 0, run.err
    result = json.loads(run.out)
    assert (result["n"], result["k"], result["t"]) == (7, 4, 1)


def test_encoder_accepts_a_code_object_through_the_stream_api(gauge_file):
    sink = io.BytesIO()
    with bitmend.Encoder(sink, bitmend.load_code_file(gauge_file), 3, 64) as enc:
        enc.write(b"Brackwater Weir 0.82 m\n" * 10)
    assert bitmend.decode_bytes(sink.getvalue()).data == b"Brackwater Weir 0.82 m\n" * 10
