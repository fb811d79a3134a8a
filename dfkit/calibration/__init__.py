r"""Bearing error measured on beacon trials, and its use in every fix.

A *beacon trial* is a bearing taken on a test transmitter (a beacon) placed at a known spot, so its error is
known. A trials sheet is a bearing sheet (every column and reading option of ``dfkit fix``) plus the beacon's
position in one of these forms: ``beacon_lat``/``beacon_lon``; ``beacon_utm_zone``/``beacon_easting``/
``beacon_northing``; ``beacon_mgrs``; or a ``beacon`` label looked up in the stations file. A ``beacon`` label
given beside coordinates is just the beacon's name.

For each trial the error is

    e = wrap180(observed true bearing - geodesic azimuth from the station to the beacon)   [°]

(the azimuth by Karney's algorithm, :mod:`dfkit.geodesy`). Trials are grouped (``by``: an antenna, an
observer, any column; the default is ``antenna`` when the sheet has one, else ``observer``, else one group),
and each group gets:

* **wild trials** left out and listed: an error farther than :data:`~dfkit.policy.WILD_TRIAL_MADS` robust SDs
  (1.4826 x median absolute deviation, at least :data:`~dfkit.policy.WILD_TRIAL_MIN_SCALE_DEG`) from the
  group's median error (Hampel's identifier);
* ``bias_deg``: the circular mean direction of the errors, ē = atan2(S, C) with S, C the mean sine and cosine;
  its standard error ``bias_se_deg`` = sqrt((1 - rho2) / (2 n R²)) with rho2 = mean cos 2(e - ē), and the 95 %
  interval ē ± asin(1.96 se) [1]_ (section 4.4; the section and the asin form are from memory);
* ``sd_deg``: the ordinary sample SD of the errors unwrapped about ē (n - 1 in the denominator), with
  ``dof`` = n - 1 degrees of freedom. **This is the SD a calibrated bearing carries into a fix.** Why this one
  and not the von Mises or circular SD: a fix's covariance is sigma^2 Q^-1, the *second moment* of the angular
  error [3]_, which the sample variance estimates without bias; and for normal errors (n - 1) s^2 / sigma^2 is
  chi-square with n - 1 degrees of freedom, independent of the field bearings, so the fix's region is exactly
  an F(2, n - 1) region (the locate step uses it). The alternatives are reported beside it, and the choice is
  checked by coverage simulations (``tests/test_calibration.py``, ``benchmarks/calibration_study.py``);
* ``circular_sd_deg`` sqrt(-2 ln R) [1]_ [2]_; ``kappa_mle`` the von Mises maximum-likelihood concentration
  A^-1(R) (A = I1/I0, solved exactly); ``kappa`` the same with Fisher's small-sample correction for n <= 15
  ([1]_ eq. 4.41, from memory): kappa* = max(kappa - 2/(n kappa), 0) when kappa < 2, else
  (n - 1)^3 kappa / (n^3 + n); ``sd_from_kappa_deg`` the wrapped-normal SD with the same mean resultant
  length, A(kappa) = exp(-sigma^2 / 2);
* a check whether the error grows (or shrinks) with distance: Spearman's rank correlation of |e - ē| with the
  station-beacon distance (``distance_rho``, ``distance_p``), and the SD of the nearer and farther halves.

:func:`apply` removes each group's bias from the matching bearings of a field sheet and gives them the group's
SD as known; :func:`leave_one_beacon_out` checks the calibration honestly, by solving each beacon from its own
trials with a calibration made without it.

References
----------
.. [1] N. I. Fisher, *Statistical Analysis of Circular Data*, Cambridge University Press, 1993.
.. [2] K. V. Mardia and P. E. Jupp, *Directional Statistics*, Wiley, 2000.
.. [3] R. G. Stansfield, "Statistical theory of d.f. fixing", J. IEE Part IIIA 94(15), 762-770, 1947.
"""

from dfkit.calibration.apply import apply
from dfkit.calibration.check import BeaconCheck, inside_ellipse, leave_one_beacon_out, wilson_interval
from dfkit.calibration.circular import (
    CircularSummary,
    circular_summary,
    kappa_from_rbar,
    kappa_small_sample,
    mean_resultant_ratio,
    sd_from_kappa,
)
from dfkit.calibration.groups import CALIBRATION_COLUMNS, GROUP_STATUS, Calibration, calibrate
from dfkit.calibration.table import read_calibration
from dfkit.calibration.trials import BEACON_ALIASES, BEACON_COLUMNS, Trials, read_trials

__all__ = [
    "BEACON_ALIASES", "BEACON_COLUMNS", "BeaconCheck", "CALIBRATION_COLUMNS", "Calibration", "CircularSummary",
    "GROUP_STATUS", "Trials", "apply", "calibrate", "circular_summary", "inside_ellipse", "kappa_from_rbar",
    "kappa_small_sample", "leave_one_beacon_out", "mean_resultant_ratio", "read_calibration", "read_trials",
    "sd_from_kappa", "wilson_interval",
]
