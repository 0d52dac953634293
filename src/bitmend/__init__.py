"""bitmend: streaming forward error correction with linear block codes.

    import bitmend
    blob = bitmend.encode_bytes(b"gauge 17: 2.31 m")
    result = bitmend.decode_bytes(blob)
    result.data, result.report.summary.complete

Every error bitmend raises on purpose derives from bitmend.BitmendError (see
bitmend.errors for the groups). The public names below are loaded when first used (PEP 562):
`import bitmend` itself imports only the error classes, so that the command line starts
without numpy when a command does not need it (a small encode), and the planning,
simulation, campaign, plotting and network parts load only when one of their names is used.
"""

from __future__ import annotations

from importlib import import_module

from bitmend.errors import BitmendError, CodeError, ContainerError, SettingError

# name -> module that defines it, imported on first use
_LAZY = {
    "open": "bitmend.api",
    "Encoder": "bitmend.api",
    "Decoder": "bitmend.api",
    "encode_bytes": "bitmend.api",
    "decode_bytes": "bitmend.api",
    "Decoded": "bitmend.api",
    "load_code_file": "bitmend.api",
    "load_key_file": "bitmend.keyfile",
    "encode_records": "bitmend.records",
    "decode_records": "bitmend.records",
    "warm_up": "bitmend.warmup",
    "get_code": "bitmend.codes.catalog",
    "code_names": "bitmend.codes.catalog",
    "DEFAULT_CODE": "bitmend.codes.catalog",
    "DEFAULT_DEPTH": "bitmend.codes.catalog",
    "BlockCode": "bitmend.codes.base",
    "BinaryLinearCode": "bitmend.codes.linear",
    "BCHCode": "bitmend.codes.bch",
    "ReedSolomonCode": "bitmend.codes.reed_solomon",
    "UnknownCodeError": "bitmend.codes.catalog",
    "CodeDefinitionError": "bitmend.codes.linear",
    "BCHParameterError": "bitmend.codes.bch",
    "ReedSolomonParameterError": "bitmend.codes.reed_solomon",
    "HeaderError": "bitmend.container.format",
    "UnsupportedVersionError": "bitmend.container.format",
    "NotAContainerError": "bitmend.container.assembler",
    "DamagedDataError": "bitmend.container.assembler",
    "RepairSpecError": "bitmend.container.repair",
    "KeyFileError": "bitmend.keyfile",
    "RecordError": "bitmend.records",
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

__all__ = ["BitmendError", "CodeError", "ContainerError", "SettingError", *_LAZY]
__version__ = "0.1.0"


def __getattr__(name: str):
    """A public name, imported from its module when first asked for; a submodule that was
    not imported yet (`bitmend.api`), as when this package imported them all at once."""
    module = _LAZY.get(name)
    if module is None:
        if name.startswith("_"):
            raise AttributeError(f"module 'bitmend' has no attribute {name!r}")
        try:
            return import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"{__name__}.{name}":
                raise
            raise AttributeError(f"module 'bitmend' has no attribute {name!r}") from None
    value = getattr(import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
