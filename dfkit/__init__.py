"""dfkit: radio direction finding on WGS84.

Bearings in (lat/lon, UTM, MGRS, stations or a GPS track; degrees, mils or grads;
true, magnetic or grid north), positions out, each with an honest confidence
region or a plain reason why there is none.

The public names below are loaded when first used (``dfkit.read_bearings``, ``from dfkit import Bearings``), so
that importing the package itself loads neither numpy nor pandas: the command line (:mod:`dfkit.cli`) decides
how numpy's libraries start before numpy is loaded.
"""

from __future__ import annotations

import importlib

from dfkit.problems import Problem, SheetError

__version__ = "0.1.0"

__all__ = ["Bearings", "Problem", "ReadOptions", "SheetError", "check_sheet", "read_bearings", "__version__"]

# name -> the module it comes from (loaded on first use)
_LATER = {"Bearings": "dfkit.observations", "ReadOptions": "dfkit.observations",
          "check_sheet": "dfkit.observations", "read_bearings": "dfkit.observations"}


def __getattr__(name):
    if name in _LATER:
        value = getattr(importlib.import_module(_LATER[name]), name)
        globals()[name] = value        # found directly from now on
        return value
    raise AttributeError(f"module 'dfkit' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
