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

#: Home ranges from fewer fixes than this are computed but flagged 'few_fixes'. Common practice; Seaman
#: et al. (1999, J. Wildl. Manage. 63(2) 739-747 [from memory]) advise at least 30 fixes per animal
#: for kernel estimates.
MIN_RANGE_FIXES = 30
# --- beacon calibration (dfkit.calibration)

#: A trial whose error lies farther than this many robust SDs (1.4826 x the median absolute deviation) from its
#: group's median error is *wild* (a reflection, a 180-degree ambiguity, a misread) and is left out of the
#: calibration. This is Hampel's identifier (F. R. Hampel, "The influence curve and its role in robust
#: estimation", JASA 69(346), 383-393, 1974 [from memory]), usually run with 3; 4 is used here so that a clean
#: normal sample of a few hundred trials loses no good trial (P(|z| > 4) = 6.3e-5). Common practice, no single
#: source for the value.
WILD_TRIAL_MADS = 4.0

#: Smallest robust SD the wild-trial rule uses [°]: bearings are read to whole degrees, so a tight group whose
#: median absolute deviation is 0 must not call every 1-degree miss wild (common practice, no source).
WILD_TRIAL_MIN_SCALE_DEG = 1.0

#: Groups with fewer usable trials than this are flagged 'few' (used, with an F(2, n - 1) region that carries the
#: SD's own uncertainty). The relative standard error of an SD from n normal trials is about 1/sqrt(2(n - 1)),
#: 13 % at n = 30 (a derivation); the threshold itself is common practice, no single source.
MIN_TRIALS_TRUST = 30

#: Groups with fewer usable trials than this are not used at all ('unusable'): the wild-trial rule and the SD
#: mean little on fewer (common practice, no source).
MIN_TRIALS_USE = 5

#: A trial whose station is closer to the beacon than this is rejected [m]: within a few wavelengths of a VHF
#: transmitter (2 m at 150 MHz) a bearing is not a far-field bearing (common practice, no source).
MIN_TRIAL_DISTANCE_M = 10.0

#: A group with more than this fraction of wild trials is flagged: the site or the antenna needs a look
#: (common practice, no source).
MAX_WILD_FRACTION = 0.10

#: Significance level of the check whether a group's error grows (or shrinks) with distance (Spearman rank
#: correlation of the absolute error with distance). 0.01 rather than the usual 0.05 because every group is
#: tested and a false warning sends people to re-do trials; common practice, no source for the level.
DISTANCE_CHECK_ALPHA = 0.01

#: With a single bearing there is no estimate; a plan averages over positions along the bearing out to
#: this range [m]. Common practice, no single source: ground-level VHF and 2 m hunt transmitters are
#: usually heard over a few kilometres; set it (--max-range) from what your kit reaches.
DEFAULT_MAX_RANGE_M = 5000.0

#: Bearing SD assumed for the spread of plausible positions when no SD is known at all [°] (a plan then
#: reports ranks and ratios but no areas). Common practice, no single source: hand-held Yagi bearings are
#: typically good to a few degrees to about 10 degrees.
NOMINAL_SD_DEG = 5.0
