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

#: With a known bearing SD, a fix whose residuals' chi-square (n_used - 2 degrees of freedom) has a
#: p-value below this is flagged ``inconsistent``: the bearings disagree more than their SD allows.
#: A conventional significance level (our choice, checked by benchmarks/coverage.py: about 1 clean fix in
#: 100 is flagged, while 1 in 1000 let a third of the three-bearing fixes with a wild bearing through).
INCONSISTENT_P = 0.01

#: With the SD estimated from the fix itself, an estimate above this is flagged ``inconsistent`` [°].
#: Common practice, no single source: published beacon trials report bearing errors of a few degrees
#: (SD 1.6° in Podruzny 1996, MSc thesis, Montana State Univ.; 4.9-9.9° at 900 m in Grovenburg et al.
#: 2013, Wildlife Biology 19(1) [abstracts]); twice the larger is taken as the limit of plausible.
PLAUSIBLE_SD_DEG = 20.0

#: A bearing missing its fix by more than this looks reversed by 180 degrees (read from the back of the
#: antenna) [°]. Common practice, no single source.
REVERSED_DEG = 150.0

#: The ellipse is called a poor summary of a fix's likelihood region when their areas differ by more
#: than this factor (our choice, for the reason text only).
ELLIPSE_MISMATCH = 1.5

#: A fix closer to an observer than this fraction of its farthest observer's range is flagged
#: ``near_observer``: that bearing hardly constrains it, and a wild bearing can make a false crossing there
#: look consistent. Our choice, checked by benchmarks/coverage.py.
NEAR_OBSERVER = 0.05
