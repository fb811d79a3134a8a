"""CSV tables: UTF-8, ISO 8601 UTC times, sensible rounding, empty cells for missing values."""

from __future__ import annotations

import numpy as np
import pandas as pd

from dfkit.export.atomic import atomic_write

_ROUNDING = {"lat": 7, "lon": 7, "true_bearing": 3, "declination": 3, "convergence": 4, "declination_sd": 3,
             "semi_major_m": 1, "semi_minor_m": 1, "orientation_deg": 1, "area_m2": 0, "sd_deg": 3,
             "crossing_deg": 1, "span_min": 1, "max_residual_deg": 2, "kappa": 1, "residual_deg": 3,
             "weight": 3, "range_m": 1, "region_area_m2": 0, "region_reach_m": 1, "cov_ee_m2": 2, "cov_en_m2": 2,
             "cov_nn_m2": 2}


def _iso(series: pd.Series) -> pd.Series:
    """UTC times as ISO 8601 text ending in Z; '' where missing."""
    values = series.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(dtype="datetime64[s]")
    text = np.char.add(np.datetime_as_string(values, unit="s"), "Z")
    return pd.Series(np.where(np.isnat(values), "", text), index=series.index, dtype=object)


def _for_csv(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy()
    for c in out.columns:
        if isinstance(out[c].dtype, pd.DatetimeTZDtype):
            out[c] = _iso(out[c])
        elif c in _ROUNDING:
            out[c] = out[c].astype(float).round(_ROUNDING[c])
    return out


def write_table(df: pd.DataFrame, path) -> None:
    """A table as UTF-8 CSV: ISO 8601 UTC times, sensible rounding, empty cells for missing values."""
    with atomic_write(path, newline="") as fh:
        _for_csv(df).to_csv(fh, index=False, lineterminator="\n")
