"""Magnetic declination from the World Magnetic Model 2025, offline.

Uses NOAA/CIRES's own ``wmm-calculator`` package, which bundles the WMM2025
coefficients (no network at run time) and evaluates many points at once. The
model is valid from 2025.0 to 2030.0; dfkit refuses dates outside that life
instead of extrapolating.

Reference: Chulliat, A. et al. (2025), *The US/UK World Magnetic Model for
2025-2030: Technical Report*, NOAA NCEI. The test values used in
``tests/test_magnetic.py`` come from its test-value table.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

#: Life of the bundled model, as decimal years [start, end).
MODEL_NAME = "WMM2025"
MODEL_START = 2025.0
MODEL_END = 2030.0

#: Horizontal field below which a compass is unreliable [nT]; WMM2025 report,
#: "blackout zone" (H < 2000 nT) and "caution zone" (H < 6000 nT).
BLACKOUT_H_NT = 2000.0
CAUTION_H_NT = 6000.0


@dataclass(frozen=True)
class Declination:
    """Declination at points: ``declination_deg`` (east positive), its 1-sigma model
    uncertainty ``sigma_deg`` and the horizontal intensity ``h_nt``."""

    declination_deg: np.ndarray
    sigma_deg: np.ndarray
    h_nt: np.ndarray


def decimal_year(epoch_seconds):
    """Decimal year of UTC instants given as seconds since 1970-01-01 (vectorised).

    >>> float(decimal_year(np.array([1735689600.0]))[0])  # 2025-01-01T00:00Z
    2025.0
    """
    t = np.asarray(epoch_seconds, dtype="float64")
    dt = t.astype("int64").astype("datetime64[s]")
    year = dt.astype("datetime64[Y]")
    start = year.astype("datetime64[s]").astype("int64").astype(float)
    end = (year + 1).astype("datetime64[s]").astype("int64").astype(float)
    return year.astype(int) + 1970 + (t - start) / (end - start)


def in_model_life(dyear):
    """True where a decimal year lies within the model's life."""
    d = np.asarray(dyear, float)
    return (d >= MODEL_START) & (d < MODEL_END)


def declination(lat, lon, dyear, height_km=0.0) -> Declination:
    """WMM2025 declination at points and dates (all inside the model's life).

    Parameters
    ----------
    lat, lon : array_like
        WGS84 latitude and longitude. [°]
    dyear : array_like
        Decimal year, within [2025.0, 2030.0).
    height_km : float or array_like
        Height above the WGS84 ellipsoid. [km]

    Raises
    ------
    ValueError
        A date outside the model's life (callers check :func:`in_model_life` first).
    """
    from wmm import wmm_calc

    lat = np.atleast_1d(np.asarray(lat, float))
    lon = np.atleast_1d(np.asarray(lon, float))
    dyear = np.broadcast_to(np.asarray(dyear, float), lat.shape).copy()
    if lat.size == 0:
        empty = np.zeros(0)
        return Declination(empty, empty, empty)
    if not in_model_life(dyear).all():
        bad = dyear[~in_model_life(dyear)][0]
        raise ValueError(f"date {bad:.3f} is outside the life of {MODEL_NAME} ({MODEL_START}-{MODEL_END})")
    h = np.broadcast_to(np.asarray(height_km, float), lat.shape).copy()
    model = wmm_calc()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # blackout-zone warnings: reported by dfkit from h_nt instead
        model.setup_env(lat, lon, h, unit="km")
        model.setup_time(dyear=dyear)
        field = model.get_all()
    dec = np.asarray(field["dec"], float).reshape(lat.shape)
    hnt = np.asarray(field["h"], float).reshape(lat.shape)
    # WMM2025 declination error model: sqrt(0.26^2 + (5417/H)^2) degrees (1 sigma), H in nT
    # (WMM2025 technical report, error model table; as coded in wmm-calculator's uncertainty.py).
    sigma = np.sqrt(0.26**2 + (5417.0 / np.maximum(hnt, 1.0)) ** 2)
    return Declination(dec, sigma, hnt)
