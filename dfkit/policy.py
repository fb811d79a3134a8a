"""Every rule-of-thumb threshold dfkit applies, in one place, each with its source.

A value marked "common practice, no single source" is a field habit that no
publication fixes; change it with an option where one exists, and say so in a
report. Values that come from a publication name it (from memory where marked).
"""

from __future__ import annotations

#: Default grouping window [minutes]: the largest gap between successive bearings of one fix (unlabelled
#: bearings of a tag are chained while each follows the last within it; a labelled fix with a longer gap is
#: flagged). Common practice, no single source: bearings of one fix are taken a few to about 20 min apart
#: (see e.g. Schmutz & White 1990, J. Wildl. Manage. 54: 506-510 [from memory], on animal movement during a fix).
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

#: Fastest plausible speed between two GPS track points [m/s]. Common practice, no source: faster than a light
#: aircraft flying a telemetry survey; a point that leaps away and back faster than this is a GPS glitch.
TRACK_MAX_SPEED_MS = 150.0

#: With a known bearing SD, a fix whose residuals' chi-square (n_used - 2 degrees of freedom) has a
#: p-value below this is flagged ``inconsistent``: the bearings disagree more than their SD allows.
#: A conventional significance level (our choice, checked by benchmarks/coverage.py: about 1 clean fix in
#: 100 is flagged, while 1 in 1000 let a third of the three-bearing fixes with a wild bearing through).
INCONSISTENT_P = 0.01

#: Prior share of bearings that are wild (a reflection, a misread, a bearing taken on the wrong signal), used to
#: weigh whether a fix could rest on one wild bearing that its fit absorbed (dfkit.locate.rivals). Common
#: practice, no single source: beacon trials in the field commonly leave out a few per cent of bearings as wild;
#: measure yours (``dfkit calibrate`` counts wild trials) and set it with --wild-share. 0 turns the weighing off.
WILD_SHARE = 0.05

#: Largest accepted WILD_SHARE: the weighing counts at most one wild bearing a fix, and above a quarter two wild
#: bearings in one fix become likely (with eight bearings, 63 % at 0.25); a sheet that wild needs a robust method
#: and better bearings, not this weighing (our choice).
MAX_WILD_SHARE = 0.25

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

# --------------------------------------------------------------------------- reading sheets (issue 7)

#: Unlabelled bearings of one tag form one fix while each follows the previous one within the window:
#: a fix may still last at most this many windows before it is flagged ``long_span`` (a chain of
#: bearings 15 min apart for two hours is not one position of a moving animal). Common practice, no source.
FIX_SPAN_WINDOWS = 3.0

#: Bearings with the same tag and fix label but more than this many hours apart are not one fix: the
#: label is split into one fix per part (another day, another session) [h]. Common practice, no source:
#: longer than any hunt or tracking session, shorter than the night between two field days.
SPLIT_LABEL_GAP_H = 6.0

#: Years dfkit accepts in a time: from the start of GPS time (6 January 1980, IS-GPS-200; from memory)
#: to 2100; a year outside is a typing error (2206, 1026). A plausibility rule of dfkit's own, no source.
PLAUSIBLE_YEARS = (1980, 2100)

#: A latitude-band letter is consistent with a UTM position within this margin of the band's edges [°]
#: (about 5.5 km: a position read off a map sheet of the neighbouring band). dfkit's own choice, no source.
BAND_EDGE_MARGIN_DEG = 0.05

#: A row's lat/lon looks swapped when, as written, it lies farther than the first value from its own
#: fix's other positions (or the GPS track) while swapped it lies within the second [°]. Common
#: practice, no source: stations of one fix are a few km apart, so 5° (about 550 km) is a typing error.
SWAPPED_FAR_DEG = 5.0
SWAPPED_NEAR_DEG = 0.5

#: A station farther than both of these from the middle of the other stations of its own fix (3 or more
#: stations) is refused as a likely position mistake (a lost minus sign, a wrong leading digit, a missing digit):
#: [km], and times the fix's spread (the median distance of its stations from their middle). The bearings of one
#: fix are taken within walking or driving reach in a few minutes (a car covers about 30 km in the default
#: 20-minute window), and the spread factor leaves wide networks whose stations are all far apart alone.
#: dfkit's own rule, no source.
FAR_STATION_KM = 50.0
FAR_STATION_SPREADS = 20.0

#: A UTM row outside its zone's strip is refused as a likely missing or extra digit when the other
#: rows of its fix in the same zone lie inside the strip and more than this far from it [m].
#: dfkit's own rule, no source: stations of one fix are rarely more than tens of km apart.
OUT_OF_STRIP_TYPO_M = 100_000.0

#: An MGRS reference names a square, and dfkit uses its centre, up to half the square's diagonal from the station.
#: References naming squares of at least the first size [m] (2 digits: 10 km; none: 100 km) are refused: the
#: station could be 7 km or more off, farther than VHF bearings usually reach. Squares of at least the second size
#: (4 digits: 1 km, up to 707 m off) are read with a warning: with a known SD the fix's region carries
#: the square's rounding (dfkit.locate.rounding), but a transmitter that close to an observer is poorly placed.
#: dfkit's own rule, no source (MGRS precision by digit count: NGA.STND.0037, from memory).
MGRS_REFUSED_SQUARE_M = 10_000.0
MGRS_WARNED_SQUARE_M = 1_000.0

#: Observer positions written to a step finer than this [m] (lat/lon to 5 decimals or more, whole UTM metres,
#: 10-digit MGRS) count as not rounded (dfkit.observations.precision). Common practice, no source: a hand-held
#: GPS unit is good to a few metres (from memory), an error dfkit does not model either.
POSITION_STEP_IGNORED_M = 5.0
#: A fix whose observers' rounding (dfkit.locate.rounding) adds less than this share to the SD of every one of its
#: bearings (SD_pos / SD below 0.2: the SD grows by under 2 %) is solved as before, bit for bit. dfkit's own rule,
#: no source: far below what a coverage study can see.
ROUNDING_NEGLIGIBLE_RATIO = 0.2
#: A fix whose region the observers' rounding widens by at least this factor (linear size) says so in its reason.
#: dfkit's own rule, no source.
ROUNDING_SAID_FACTOR = 1.1

#: Lowest bearing SD dfkit accepts, in the sheet or as an option [°]. Common practice, no source: the
#: best fixed DF systems reach a few tenths of a degree; 0.01° (36 arc-seconds) is beyond any DF
#: antenna, and much smaller values make the ellipse arithmetic underflow (1e-150° gave no ellipse).
MIN_SD_DEG = 0.01

#: Largest grouping window [min]: longer windows would join bearings that dfkit splits as another
#: session (:data:`SPLIT_LABEL_GAP_H`).
MAX_WINDOW_MIN = 60.0 * SPLIT_LABEL_GAP_H

#: Largest --track-gap [s]: a position interpolated over more than an hour of missing track is a guess.
#: Common practice, no source.
MAX_TRACK_GAP_S = 3600.0

#: With a single bearing there is no estimate; a plan averages over positions along the bearing out to
#: this range [m]. Common practice, no single source: ground-level VHF and 2 m hunt transmitters are
#: usually heard over a few kilometres; set it (--max-range) from what your kit reaches.
DEFAULT_MAX_RANGE_M = 5000.0

#: Bearing SD assumed for the spread of plausible positions when no SD is known at all [°] (a plan then
#: reports ranks and ratios but no areas). Common practice, no single source: hand-held Yagi bearings are
#: typically good to a few degrees to about 10 degrees.
NOMINAL_SD_DEG = 5.0

# --------------------------------------------------------------------------- estimated SDs (field trial)

#: An SD estimated from a fix's own residuals is never taken below this [°] (nor below the rounding SD of the
#: step its bearings were written with: dfkit.locate.resolution); a given or calibrated SD is used as given.
#: Common practice, no single source: bearings taken by hand are not better than about a degree (the smallest
#: SD in the beacon trials cited at PLAUSIBLE_SD_DEG is 1.6°, Podruzny 1996 [abstract]). Checked by
#: benchmarks/coverage.py (DEVELOPERS.md): with three bearings an estimate has one degree of freedom and falls
#: below a tenth of the true SD in 8 % of fixes; those tiny regions were most of the misses among ok fixes
#: (true SD 5°: ok fixes held the truth 85-94 % without the floor, 100 % with it; true SD 10°: 72-93 % and
#: 95-98 %).
MIN_ESTIMATED_SD_DEG = 1.0
