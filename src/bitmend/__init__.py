"""bitmend: streaming forward error correction with linear block codes.

    import bitmend
    blob = bitmend.encode_bytes(b"gauge 17: 2.31 m")
    result = bitmend.decode_bytes(blob)
    result.data, result.report.summary.complete

Every error bitmend raises on purpose derives from bitmend.BitmendError (see
bitmend.errors for the groups). Errors of the planning, simulation, campaign, plotting and
network parts are exported here too, but their modules load only when such a name is first
used, so that `import bitmend` stays quick for a small encode.
"""

from __future__ import annotations

from importlib import import_module

from bitmend.api import (Decoded, Decoder, Encoder, decode_bytes, encode_bytes, load_code_file, load_key_file,
                         open)
from bitmend.codes.base import BlockCode
from bitmend.codes.bch import BCHCode, BCHParameterError
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, UnknownCodeError, code_names, get_code
from bitmend.codes.linear import BinaryLinearCode, CodeDefinitionError
from bitmend.codes.reed_solomon import ReedSolomonCode, ReedSolomonParameterError
from bitmend.container.assembler import DamagedDataError, NotAContainerError
from bitmend.container.format import HeaderError, UnsupportedVersionError
from bitmend.container.repair import RepairSpecError
from bitmend.errors import BitmendError, CodeError, ContainerError, SettingError
from bitmend.keyfile import KeyFileError
from bitmend.records import RecordError, decode_records, encode_records

# name -> module that defines it, imported on first use (PEP 562)
_LAZY = {
    "ErasureCodeError": "bitmend.codes.erasure",
    "NotEnoughSymbolsError": "bitmend.codes.erasure",
    "SingularMatrixError": "bitmend.kernels.erasure_small",
    "NoFramesError": "bitmend.channel.drop",
    "ChannelSpecError": "bitmend.channel.spec",
    "EndpointError": "bitmend.datagrams",
    "PlanError": "bitmend.planning",
    "CampaignError": "bitmend.campaign",
    "SchedulerAddressError": "bitmend.campaign",
    "PlotUnavailableError": "bitmend.plot",
    "WorkerStoppedError": "bitmend.container.workers",
}

__all__ = [
    "open", "Encoder", "Decoder", "encode_bytes", "decode_bytes", "Decoded",
    "encode_records", "decode_records", "load_code_file", "load_key_file",
    "get_code", "code_names", "DEFAULT_CODE", "DEFAULT_DEPTH",
    "BlockCode", "BinaryLinearCode", "BCHCode", "ReedSolomonCode",
    "BitmendError", "CodeError", "ContainerError", "SettingError",
    "UnknownCodeError", "CodeDefinitionError", "BCHParameterError", "ReedSolomonParameterError",
    "HeaderError", "UnsupportedVersionError", "NotAContainerError", "DamagedDataError",
    "RepairSpecError", "KeyFileError", "RecordError",
    *_LAZY,
]
__version__ = "0.1.0"


def __getattr__(name: str):
    """The exports of heavier modules, imported when first asked for."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'bitmend' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
