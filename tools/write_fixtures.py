"""Write the fixtures of the current container format version into tests/fixtures/v<N>.

Each case is one container encoded with a fixed stream identity (and, where keyed, a fixed
key), so the same library must write it again byte for byte; the tests hold every later
version of bitmend to that (tests/test_format_versions.py). Run once per format version,
from a checkout whose output is the reference:

    python tools/write_fixtures.py            # refuses to overwrite an existing folder
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from pathlib import Path

import bitmend
from bitmend.codes.custom import parse_code_definition
from bitmend.container.format import FORMAT_VERSION

ROOT = Path(__file__).resolve().parents[1]
PAYLOAD_SOURCE = ROOT / "samples" / "gauge-telemetry.log"
PAYLOAD_BYTES = 1500  # enough for several frames at the small frame sizes below
STREAM_ID = 0x5EED_0000_0000_0000  # fixed so that every encode is reproducible
KEY_HEX = "000102030405060708090a0b0c0d0e0f101112131415161718191a1b1c1d1e1f"  # invented, fixtures only
CUSTOM_DEFINITION = "# invented (7,4) code for the fixture, a Hamming code in another column order\n" \
                    "generator\n1000110\n0100011\n0010111\n0001101\n"


def cases() -> list[dict]:
    """Every catalog code once, at depths and frame sizes that vary, plus the stream kinds."""
    out = []
    for i, name in enumerate(bitmend.code_names()):
        depth = (1, 2, 3, 8)[i % 4]
        out.append({"name": f"{name}-d{depth}", "code": name, "depth": depth, "frame_bytes": 400 + 37 * i})
    out.append({"name": "custom-7-4-d4", "code": "custom", "depth": 4, "frame_bytes": 512})
    out.append({"name": "keyed-golay-24-12-d8", "code": "golay-24-12", "depth": 8, "frame_bytes": 300,
                "key_hex": KEY_HEX})
    out.append({"name": "repair-2-4-hamming-15-11-d8", "code": "hamming-15-11", "depth": 8, "frame_bytes": 200,
                "repair": "2/4"})
    out.append({"name": "empty-golay-24-12", "code": "golay-24-12", "depth": 8, "frame_bytes": 1024,
                "payload_bytes": 0})
    return out


def encode_case(case: dict, payload: bytes) -> bytes:
    """The container for one case, from its settings (also used by the tests)."""
    code = parse_code_definition(CUSTOM_DEFINITION) if case["code"] == "custom" else case["code"]
    key = bytes.fromhex(case["key_hex"]) if "key_hex" in case else None
    return bitmend.encode_bytes(payload, code=code, depth=case["depth"], frame_bytes=case["frame_bytes"],
                                stream_id=STREAM_ID, repair=case.get("repair"), key=key)


def main() -> int:
    folder = ROOT / "tests" / "fixtures" / f"v{FORMAT_VERSION}"
    if folder.exists():
        print(f"{folder} exists: fixtures of a released version are never rewritten", file=sys.stderr)
        return 1
    folder.mkdir(parents=True)
    source = PAYLOAD_SOURCE.read_bytes()[:PAYLOAD_BYTES]
    (folder / "payload.txt").write_bytes(source)
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=ROOT, capture_output=True,
                            text=True).stdout.strip()
    manifest = {"format_version": FORMAT_VERSION, "written_by": f"bitmend {bitmend.__version__} at commit {commit}",
                "stream_id": STREAM_ID, "payload": "payload.txt",
                "payload_sha256": hashlib.sha256(source).hexdigest(), "custom_definition": CUSTOM_DEFINITION,
                "cases": []}
    for case in cases():
        payload = source[: case.get("payload_bytes", len(source))]
        blob = encode_case(case, payload)
        (folder / f"{case['name']}.bmd").write_bytes(blob)
        manifest["cases"].append({**case, "container": f"{case['name']}.bmd", "container_bytes": len(blob),
                                  "container_sha256": hashlib.sha256(blob).hexdigest()})
    (folder / "manifest.json").write_text(json.dumps(manifest, indent=1) + "\n")
    print(f"wrote {len(manifest['cases'])} fixtures to {folder}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
