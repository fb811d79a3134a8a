"""Every rule-of-thumb threshold dfkit applies, in one place, each with its source.

A value marked "common practice, no single source" is a field habit that no
publication fixes; change it with an option where one exists, and say so in a
report. Values that come from a publication name it (from memory where marked).
"""

from __future__ import annotations

#: Default time window for grouping unlabelled bearings into fixes [minutes].
#: Common practice, no single source: bearings of one fix are taken within
#: about 10-20 min (see e.g. Schmutz & White 1990 on animal movement during a fix).
DEFAULT_WINDOW_MIN = 20.0

#: Two-bearing fixes crossing at less than this angle (or more than 180 minus it)
#: are flagged as shallow [degrees]. Common practice, no single source; Chu et al.
#: (1989, USGS) found larger errors for angles within 20 degrees of parallel.
SHALLOW_CROSSING_DEG = 20.0

#: Stations closer together than this count as one spot [m] (a numerical limit, not a field rule).
ONE_SPOT_M = 1.0

#: A residual larger than this many SDs is pointed out in the reason (common practice, no single source).
WILD_SD = 3.0

#: Largest accepted distance between two position columns of one row that disagree [m]
#: (common practice, no single source: a hand-held GPS is good to a few metres, a map reading to tens).
POSITION_AGREEMENT_M = 50.0

#: Default largest time from a bearing to the nearest GPS track point [s]
#: (common practice, no source: a GPS logging every few seconds leaves no larger gaps).
DEFAULT_TRACK_GAP_S = 60.0

#: With a single bearing there is no estimate; a plan averages over positions along the bearing out to
#: this range [m]. Common practice, no single source: ground-level VHF and 2 m hunt transmitters are
#: usually heard over a few kilometres; set it (--max-range) from what your kit reaches.
DEFAULT_MAX_RANGE_M = 5000.0

#: Bearing SD assumed for the spread of plausible positions when no SD is known at all [°] (a plan then
#: reports ranks and ratios but no areas). Common practice, no single source: hand-held Yagi bearings are
#: typically good to a few degrees to about 10 degrees.
NOMINAL_SD_DEG = 5.0
