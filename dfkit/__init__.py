"""dfkit: radio direction finding on WGS84.

Bearings in (lat/lon, UTM, MGRS, stations or a GPS track; degrees, mils or grads;
true, magnetic or grid north), positions out, each with an honest confidence
region or a plain reason why there is none.
"""

from dfkit.observations import Bearings, ReadOptions, check_sheet, read_bearings
from dfkit.problems import Problem, SheetError

__version__ = "0.1.0"

__all__ = ["Bearings", "Problem", "ReadOptions", "SheetError", "check_sheet", "read_bearings", "__version__"]
