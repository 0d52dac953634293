"""Custom binary linear codes from a small text or JSON definition (no I/O here: the
caller reads the file and hands over its text).

Text form: `#` starts a comment; blank lines are ignored; the first remaining line names
the matrix, `generator` (k x n, rows span the code) or `parity-check` (r x n, the code is
its null space); every following line is one row of 0 and 1 (spaces between bits are
allowed):

    # river-gauge uplink: the (7, 4) Hamming code
    parity-check
    1110100
    1101010
    1011001

JSON form: {"generator": [[1, 0, ...], ...]} or {"parity_check": [...]}, rows as lists of
0/1 or as strings of 0/1, with an optional "name" and "description".

Every problem is a CodeDefinitionError whose message is one line naming the source, and
the line where there is one.
"""

from __future__ import annotations

import json
import re

import numpy as np

from bitmend.codes.catalog import code_names
from bitmend.codes.linear import MAX_MESSAGE_BITS, MAX_PARITY_BITS, BinaryLinearCode, CodeDefinitionError

MAX_DEFINITION_CHARS = 1 << 20  # a definition is a few hundred characters; refuse anything huge
MAX_LENGTH = MAX_MESSAGE_BITS + MAX_PARITY_BITS  # n
KINDS = {"generator": "generator", "parity-check": "parity-check", "parity_check": "parity-check"}
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._+-]{0,39}$")


def parse_code_definition(text: str, source: str = "code definition") -> BinaryLinearCode:
    """The code a text or JSON definition describes, checked; source names it in errors."""
    if len(text) > MAX_DEFINITION_CHARS:
        raise CodeDefinitionError(f"{source}: {len(text)} characters is far too long for a code definition "
                                  f"(n <= {MAX_LENGTH}); is this the right file?")
    if text.lstrip().startswith("{"):
        kind, rows, name, description = _parse_json(text, source)
    else:
        kind, rows, name, description = _parse_text(text, source)
    matrix = np.array(rows, dtype=np.uint8)
    return build_code(kind, matrix, source, name, description or f"from {source}")


def build_code(kind: str, matrix: np.ndarray, source: str = "code definition", name: str | None = None,
               description: str = "") -> BinaryLinearCode:
    """A BinaryLinearCode from a 0/1 matrix of the given kind, with limits checked first
    and every failure reported as one line naming source."""
    rows, n = matrix.shape
    if n < 2:
        raise CodeDefinitionError(f"{source}: rows of {n} bit{'s' * (n != 1)} define no code; need n >= 2")
    if n > MAX_LENGTH:
        raise CodeDefinitionError(f"{source}: n = {n} bits per row; codes here have n <= {MAX_LENGTH} "
                                  f"(k <= {MAX_MESSAGE_BITS}, n - k <= {MAX_PARITY_BITS})")
    if rows >= n:
        what = "k" if kind == "generator" else "n - k"
        raise CodeDefinitionError(f"{source}: a {kind} matrix needs fewer rows than columns ({what} < n), "
                                  f"got {rows} x {n}")
    if name is not None and name in code_names():
        raise CodeDefinitionError(f"{source}: the name {name!r} belongs to a catalog code; choose another")
    label = name or "custom"
    try:
        if kind == "generator":
            code = BinaryLinearCode.from_generator(matrix, name=label, description=description)
        else:
            code = BinaryLinearCode.from_parity_check(matrix, name=label, description=description)
    except CodeDefinitionError as exc:
        raise CodeDefinitionError(f"{source}: {_limits_hint(exc, kind, rows, n)}") from None
    if name is None:
        code.name = f"custom-{code.n}-{code.k}"
    return code


def _limits_hint(exc: CodeDefinitionError, kind: str, rows: int, n: int) -> str:
    """The engine's message, with what the matrix implies spelled out for size limits."""
    message = str(exc)
    if message.startswith("k must be"):
        return f"{message}: this {kind} matrix gives k = {n - rows if kind == 'parity-check' else rows}"
    if message.startswith("n - k must be"):
        return f"{message}: this {kind} matrix gives n - k = {rows if kind == 'parity-check' else n - rows}"
    return message


def _parse_text(text: str, source: str) -> tuple[str, list[list[int]], str | None, str]:
    kind = None
    rows: list[list[int]] = []
    width = None
    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        where = f"{source} line {number}"
        if kind is None:
            word = line.lower()
            if word not in KINDS:
                raise CodeDefinitionError(f"{where}: expected the matrix kind, 'generator' or 'parity-check', "
                                          f"before any row; got {_quote(line)}")
            kind = KINDS[word]
            continue
        bits = line.replace(" ", "").replace("\t", "")
        if not set(bits) <= {"0", "1"}:
            bad = next(ch for ch in bits if ch not in "01")
            raise CodeDefinitionError(f"{where}: a row holds only 0 and 1 (spaces allowed), found {bad!r}")
        if len(bits) > MAX_LENGTH:
            raise CodeDefinitionError(f"{where}: a row of {len(bits)} bits; codes here have n <= {MAX_LENGTH}")
        if width is not None and len(bits) != width:
            raise CodeDefinitionError(f"{where}: this row has {len(bits)} bits, the rows above have {width}")
        if len(rows) >= MAX_LENGTH:
            raise CodeDefinitionError(f"{where}: more than {MAX_LENGTH} rows; codes here have n <= {MAX_LENGTH}")
        width = len(bits)
        rows.append([int(b) for b in bits])
    if kind is None:
        raise CodeDefinitionError(f"{source}: empty; expected 'generator' or 'parity-check' and then rows of 0/1")
    if not rows:
        raise CodeDefinitionError(f"{source}: the {kind} matrix has no rows")
    return kind, rows, None, ""


def _parse_json(text: str, source: str) -> tuple[str, list[list[int]], str | None, str]:
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise CodeDefinitionError(f"{source}: not valid JSON ({exc.msg} at line {exc.lineno} "
                                  f"column {exc.colno})") from None
    if not isinstance(doc, dict):
        raise CodeDefinitionError(f"{source}: expected a JSON object with \"generator\" or \"parity_check\"")
    known = {"generator", "parity_check", "parity-check", "name", "description"}
    unknown = sorted(set(doc) - known)
    if unknown:
        raise CodeDefinitionError(f"{source}: unknown key {unknown[0]!r}; expected \"generator\" or "
                                  "\"parity_check\", and optionally \"name\", \"description\"")
    given = [key for key in ("generator", "parity_check", "parity-check") if key in doc]
    if len(given) != 1:
        raise CodeDefinitionError(f"{source}: give exactly one of \"generator\" and \"parity_check\", "
                                  f"got {len(given) or 'neither'}{': ' + ', '.join(given) if len(given) > 1 else ''}")
    kind = KINDS[given[0]]
    matrix = doc[given[0]]
    if not isinstance(matrix, list) or not matrix:
        raise CodeDefinitionError(f"{source}: \"{given[0]}\" must be a non-empty list of rows")
    if len(matrix) > MAX_LENGTH:
        raise CodeDefinitionError(f"{source}: {len(matrix)} rows; codes here have n <= {MAX_LENGTH}")
    rows = []
    for i, row in enumerate(matrix):
        where = f"{source}: {given[0]} row {i}"
        if isinstance(row, str):
            row = row.replace(" ", "")
            if not set(row) <= {"0", "1"}:
                raise CodeDefinitionError(f"{where}: a row string holds only 0 and 1, got {_quote(row)}")
            bits = [int(b) for b in row]
        elif isinstance(row, list) and all(type(b) is int and b in (0, 1) for b in row):
            bits = list(row)
        else:
            raise CodeDefinitionError(f"{where}: expected a list of 0/1 integers or a string of 0/1")
        if len(bits) > MAX_LENGTH:
            raise CodeDefinitionError(f"{where}: {len(bits)} bits; codes here have n <= {MAX_LENGTH}")
        if rows and len(bits) != len(rows[0]):
            raise CodeDefinitionError(f"{where}: has {len(bits)} bits, row 0 has {len(rows[0])}")
        rows.append(bits)
    name = doc.get("name")
    if name is not None and (not isinstance(name, str) or not _NAME.match(name)):
        raise CodeDefinitionError(f"{source}: \"name\" must be 1-40 letters, digits or ._+- "
                                  f"(starting with a letter or digit), got {_quote(str(name))}")
    description = doc.get("description", "")
    if not isinstance(description, str):
        raise CodeDefinitionError(f"{source}: \"description\" must be a string")
    return kind, rows, name, description[:200]


def _quote(text: str, limit: int = 40) -> str:
    return repr(text if len(text) <= limit else text[:limit] + "...")
