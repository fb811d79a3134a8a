"""Per-tag figures of a season: how many fixes, how many ok, how big their regions, over which dates."""

from __future__ import annotations

import numpy as np
import pandas as pd

from dfkit.locate import WITH_POSITION


def tag_summary(table: pd.DataFrame) -> pd.DataFrame:
    """One row per tag of a fix table.

    Columns: ``tag``, ``fixes``, ``ok``, ``flagged`` (a position with a caveat),
    ``failed`` (no position), ``share_ok`` (ok / fixes), ``median_area_m2``
    (median confidence-region area of the ok fixes [m²]), ``first``, ``last``
    (UTC times of the first and last fix), ``bearings`` (bearings used).
    """
    cols = ["tag", "fixes", "ok", "flagged", "failed", "share_ok", "median_area_m2", "first", "last", "bearings"]
    if not len(table):
        return pd.DataFrame({c: [] for c in cols})
    t = table.assign(tag=table["tag"].astype(str))
    status = t["status"].astype(str)
    t = t.assign(_ok=status.eq("ok"), _flag=status.isin(WITH_POSITION) & status.ne("ok"),
                 _fail=~status.isin(WITH_POSITION),
                 _area=np.where(status.eq("ok"), pd.to_numeric(t["area_m2"], errors="coerce"), np.nan),
                 _time=pd.to_datetime(t["time"], utc=True),
                 _n=pd.to_numeric(t.get("n_used", t.get("n_bearings")), errors="coerce"))
    g = t.groupby("tag", sort=True)
    out = pd.DataFrame({
        "fixes": g.size(),
        "ok": g["_ok"].sum(),
        "flagged": g["_flag"].sum(),
        "failed": g["_fail"].sum(),
        "median_area_m2": g["_area"].median(),
        "first": g["_time"].min(),
        "last": g["_time"].max(),
        "bearings": g["_n"].sum(),
    }).reset_index()
    out["share_ok"] = out["ok"] / out["fixes"]
    for c in ("ok", "flagged", "failed", "bearings"):
        out[c] = out[c].astype(int)
    return out[cols]
