"""One error root: every exception class bitmend defines derives from BitmendError, falls in
its group (code, container, setting), and is exported from the package; importing the
package stays light even though the errors of heavy modules are exported too."""

from __future__ import annotations

import importlib
import json
import pkgutil
import subprocess
import sys

import pytest

import bitmend
from bitmend.errors import BitmendError, CodeError, ContainerError, SettingError

# Stops, not errors: outputs.Stopped carries SIGINT/SIGTERM out of the command line and
# campaign.CampaignInterrupted is a KeyboardInterrupt carrying a campaign's partial result.
# Like KeyboardInterrupt they must pass through `except Exception` (and so `except
# BitmendError`) handlers untouched, so they are BaseExceptions outside the root.
DELIBERATELY_OUTSIDE_THE_ROOT = {"bitmend.outputs.Stopped", "bitmend.campaign.CampaignInterrupted"}


def bitmend_modules() -> list[str]:
    """Every module of the package but __main__ (importing that runs the command line)."""
    return ["bitmend"] + [info.name for info in pkgutil.walk_packages(bitmend.__path__, "bitmend.")
                          if info.name != "bitmend.__main__"]


def exception_classes() -> dict[str, type[BaseException]]:
    """'module.Class' -> class, for every exception class defined at the top of a bitmend module."""
    found = {}
    for name in bitmend_modules():
        module = importlib.import_module(name)
        for value in vars(module).values():
            if (isinstance(value, type) and issubclass(value, BaseException)
                    and value.__module__ == module.__name__):
                found[f"{value.__module__}.{value.__qualname__}"] = value
    return found


@pytest.fixture(scope="module")
def classes() -> dict[str, type[BaseException]]:
    return exception_classes()


def test_the_walk_finds_the_errors_of_every_layer(classes):
    names = {qualified.rsplit(".", 1)[1] for qualified in classes}
    assert {"UnknownCodeError", "DamagedDataError", "KeyFileError", "PlanError", "CampaignError",
            "PlotUnavailableError", "ChannelSpecError", "EndpointError"} <= names


def test_every_exception_class_derives_from_the_root(classes):
    outside = {qualified for qualified, cls in classes.items() if not issubclass(cls, BitmendError)}
    assert outside == DELIBERATELY_OUTSIDE_THE_ROOT


def test_the_stops_outside_the_root_are_not_caught_as_exceptions(classes):
    for qualified in DELIBERATELY_OUTSIDE_THE_ROOT:
        assert not issubclass(classes[qualified], Exception), qualified


GROUPS = {
    CodeError: ["UnknownCodeError", "CodeDefinitionError", "BCHParameterError", "ReedSolomonParameterError",
                "ErasureCodeError", "NotEnoughSymbolsError"],
    ContainerError: ["HeaderError", "UnsupportedVersionError", "NotAContainerError", "DamagedDataError",
                     "NoFramesError", "WorkerStoppedError"],
    SettingError: ["KeyFileError", "RecordError", "ChannelSpecError", "EndpointError", "RepairSpecError",
                   "PlanError"],
}


@pytest.mark.parametrize("group, name", [(group, name) for group, names in GROUPS.items() for name in names])
def test_each_error_belongs_to_its_group(group, name):
    assert issubclass(getattr(bitmend, name), group)


def test_container_errors_are_os_errors_and_the_others_value_errors(classes):
    for cls in classes.values():
        if issubclass(cls, ContainerError):
            assert issubclass(cls, OSError), cls
        if issubclass(cls, (CodeError, SettingError)):
            assert issubclass(cls, ValueError), cls


def test_errors_released_before_the_root_keep_their_old_bases():
    assert issubclass(bitmend.UnknownCodeError, KeyError)
    for name in ("NotAContainerError", "DamagedDataError", "HeaderError", "NoFramesError"):
        assert issubclass(getattr(bitmend, name), ValueError), name


# the command line's own errors (a usage line with its exit code, an output that cannot be
# written) are raised and caught inside the command line; the Python API never raises them
COMMAND_LINE_MODULES = ("bitmend.cli", "bitmend.cli_io", "bitmend.cli_options", "bitmend.outputs")


def test_every_public_error_is_exported_and_listed(classes):
    public = {qualified.rsplit(".", 1)[1]: cls for qualified, cls in classes.items()
              if issubclass(cls, BitmendError) and not cls.__name__.startswith("_")
              and qualified.rsplit(".", 1)[0] not in COMMAND_LINE_MODULES}
    assert {name for name in public if getattr(bitmend, name, None) is not public[name]} == set()
    assert set(public) <= set(bitmend.__all__)
    assert set(public) <= set(dir(bitmend))


def test_every_name_in_all_is_there():
    assert [name for name in bitmend.__all__ if not hasattr(bitmend, name)] == []


def test_an_unknown_attribute_is_still_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'Nonsense'"):
        bitmend.Nonsense  # noqa: B018


HEAVY = ["bitmend.planning", "bitmend.simulate", "bitmend.campaign", "bitmend.plot", "matplotlib", "numba", "dask"]


def loaded_after(code: str) -> list[str]:
    """Which HEAVY modules a fresh interpreter holds after running code."""
    probe = f"import sys\n{code}\nimport json\nprint(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))"
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return json.loads(done.stdout)


def test_import_bitmend_loads_no_heavy_module():
    assert loaded_after("import bitmend") == []


def test_a_small_encode_and_decode_load_no_heavy_module():
    assert loaded_after("import bitmend\nbitmend.decode_bytes(bitmend.encode_bytes(b'gauge 17: 2.31 m' * 12))") == []


def test_a_lazily_exported_error_loads_its_module_on_first_use():
    assert loaded_after("import bitmend\nbitmend.PlanError") == ["bitmend.planning"]
