"""The catalog of named codes, each with a stable one-byte id carried in frame headers.

Ids are part of the container format (docs/FORMAT.md): never renumber; add new codes
with new ids. Id 0 is reserved for codes defined inside the stream.

Ids 1-11 are binary linear codes of the generic engine (codes.linear); 12-21 binary BCH
codes (codes.bch), 22-26 Reed-Solomon codes over GF(2^8) (codes.reed_solomon), whose
symbols are bytes.

Any code object stands for its catalog entry when it equals a catalog code (same family
and defining parameters: `catalog_id`); a binary code outside the catalog travels in the
frames in its generic-engine form (`definable_form`), and any other gets one CodeError.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

from bitmend.codes import families
from bitmend.codes.base import BlockCode
from bitmend.codes.bch import BCHCode
from bitmend.codes.linear import MAX_MESSAGE_BITS, MAX_PARITY_BITS, BinaryLinearCode
from bitmend.codes.reed_solomon import ReedSolomonCode
from bitmend.errors import CodeError

DEFAULT_CODE = "golay-24-12"
DEFAULT_DEPTH = 8
MAX_DEPTH = 255


@dataclass(frozen=True)
class CatalogEntry:
    name: str
    code_id: int
    build: Callable[[], BlockCode]
    use: str  # one line: what the code is good for


CATALOG: tuple[CatalogEntry, ...] = (
    CatalogEntry("rep-3", 1, lambda: families.repetition(3), "very noisy links; triple cost"),
    CatalogEntry("hamming-7-4", 2, lambda: families.hamming(3), "short blocks, one error per 7 bits"),
    CatalogEntry("hamming-15-11", 3, lambda: families.hamming(4), "one error per 15 bits"),
    CatalogEntry("hamming-31-26", 4, lambda: families.hamming(5), "one error per 31 bits, low overhead"),
    CatalogEntry("hamming-63-57", 5, lambda: families.hamming(6), "one error per 63 bits, lowest overhead"),
    CatalogEntry("secded-8-4", 6, lambda: families.hsiao_secded(4, 4), "nibbles: corrects 1, detects 2"),
    CatalogEntry("secded-16-11", 7, lambda: families.hsiao_secded(11, 5), "corrects 1, detects 2"),
    CatalogEntry("secded-39-32", 8, lambda: families.hsiao_secded(32, 7), "32-bit words: corrects 1, detects 2"),
    CatalogEntry("secded-72-64", 9, lambda: families.hsiao_secded(64, 8), "64-bit words, memory-style ECC"),
    CatalogEntry("golay-23-12", 10, families.golay23, "perfect, corrects 3 per 23 bits"),
    CatalogEntry("golay-24-12", 11, families.golay24, "default: corrects 3, detects 4, byte aligned"),
    # binary BCH: t = 2..4 at each length, from short words to long low-overhead blocks
    CatalogEntry("bch-15-7", 12, lambda: BCHCode(4, 2), "short words: 2 errors per 15 bits"),
    CatalogEntry("bch-15-5", 13, lambda: BCHCode(4, 3), "very noisy links: 3 errors per 15 bits"),
    CatalogEntry("bch-31-21", 14, lambda: BCHCode(5, 2), "2 errors per 31 bits"),
    CatalogEntry("bch-31-16", 15, lambda: BCHCode(5, 3), "3 errors per 31 bits, about half rate"),
    CatalogEntry("bch-63-51", 16, lambda: BCHCode(6, 2), "2 errors per 63 bits"),
    CatalogEntry("bch-63-45", 17, lambda: BCHCode(6, 3), "3 errors per 63 bits"),
    CatalogEntry("bch-127-113", 18, lambda: BCHCode(7, 2), "2 errors per 127 bits, 12% overhead"),
    CatalogEntry("bch-255-239", 19, lambda: BCHCode(8, 2), "2 errors per 255 bits, 7% overhead"),
    CatalogEntry("bch-255-223", 20, lambda: BCHCode(8, 4), "4 errors per 255 bits, 14% overhead"),
    CatalogEntry("bch-144-128", 21, lambda: BCHCode(8, 2, 144), "shortened: 16 bytes in 18, 2 errors per block"),
    # Reed-Solomon over GF(2^8): t counts byte errors, any bits wrong inside a byte
    CatalogEntry("rs-255-239", 22, lambda: ReedSolomonCode(255, 239), "8 byte errors per 255, 7% overhead"),
    CatalogEntry("rs-255-223", 23, lambda: ReedSolomonCode(255, 223), "16 byte errors per 255, 14% overhead"),
    CatalogEntry("rs-204-188", 24, lambda: ReedSolomonCode(204, 188), "shortened: 188-byte packets, 8 byte errors"),
    CatalogEntry("rs-128-96", 25, lambda: ReedSolomonCode(128, 96), "shortened: 16 byte errors per 128, 33% overhead"),
    CatalogEntry("rs-32-28", 26, lambda: ReedSolomonCode(32, 28), "shortened: small packets, 2 byte errors per 32"),
)

_BY_NAME = {e.name: e for e in CATALOG}
_BY_ID = {e.code_id: e for e in CATALOG}


class UnknownCodeError(CodeError, KeyError):
    """A code name or id that the catalog does not hold."""

    def __str__(self) -> str:  # KeyError would quote the message
        return str(self.args[0])


def code_names() -> list[str]:
    return [e.name for e in CATALOG]


def as_code(code: str | BlockCode) -> BlockCode:
    """The code itself, or the catalog code of that name: the one place a name-or-code
    argument becomes a code."""
    return get_code(code) if isinstance(code, str) else code


@lru_cache(maxsize=None)
def get_code(name: str) -> BlockCode:
    """The catalog code called name (built once, then cached)."""
    entry = _BY_NAME.get(name)
    if entry is None:
        raise UnknownCodeError(f"unknown code {name!r}; known codes: {', '.join(code_names())}")
    return entry.build()


def code_id(name: str) -> int:
    if name not in _BY_NAME:
        raise UnknownCodeError(f"unknown code {name!r}; known codes: {', '.join(code_names())}")
    return _BY_NAME[name].code_id


def code_by_id(identifier: int) -> BlockCode:
    entry = _BY_ID.get(identifier)
    if entry is None:
        raise UnknownCodeError(f"unknown code id {identifier}")
    return get_code(entry.name)


def entry(name: str) -> CatalogEntry:
    if name not in _BY_NAME:
        raise UnknownCodeError(f"unknown code {name!r}; known codes: {', '.join(code_names())}")
    return _BY_NAME[name]


def catalog_id(code: BlockCode) -> int | None:
    """The id of the catalog code equal to code (same family and defining parameters, the
    name aside), or None when the catalog has no such code."""
    for e in CATALOG:
        candidate = get_code(e.name)
        if candidate.n == code.n and candidate.k == code.k and candidate == code:
            return e.code_id
    return None


def definable_form(code: BlockCode) -> BinaryLinearCode:
    """The generic-engine code that carries `code` inside a stream's frames (code id 0):
    the code itself for the generic engine, else its systematic form [I_k | P] when it is
    binary with k <= MAX_MESSAGE_BITS and n - k <= MAX_PARITY_BITS (the same codewords).
    CodeError, naming the catalog codes of its family, for a code that cannot travel."""
    engine = code.generic_engine
    if engine is not None:
        return engine
    if code.symbol_bits == 1 and code.k <= MAX_MESSAGE_BITS and code.r <= MAX_PARITY_BITS:
        return BinaryLinearCode.from_generator(code.G, name=code.name, description=code.description)
    kin = [e.name for e in CATALOG if get_code(e.name).family == code.family] or code_names()
    raise CodeError(f"{code.name} is not in the catalog and cannot travel in the frames (only binary codes with "
                    f"k <= {MAX_MESSAGE_BITS} and n - k <= {MAX_PARITY_BITS} can); use a catalog code: "
                    + ", ".join(kin))
