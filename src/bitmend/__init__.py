"""bitmend: streaming forward error correction with linear block codes.

    import bitmend
    blob = bitmend.encode_bytes(b"gauge 17: 2.31 m")
    result = bitmend.decode_bytes(blob)
    result.data, result.report.summary.complete
"""

from bitmend.api import (Decoded, Decoder, Encoder, DamagedDataError, KeyFileError, NotAContainerError, decode_bytes,
                         encode_bytes, load_code_file, load_key_file, open)
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, code_names, get_code
from bitmend.records import RecordError, decode_records, encode_records

__all__ = ["open", "Encoder", "Decoder", "encode_bytes", "decode_bytes", "Decoded", "NotAContainerError",
           "DamagedDataError", "get_code", "code_names", "load_code_file", "DEFAULT_CODE", "DEFAULT_DEPTH",
           "encode_records", "decode_records", "RecordError",
           "load_key_file", "KeyFileError"]
__version__ = "0.1.0"
