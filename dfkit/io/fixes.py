"""Reading a table of fixes (CSV, as ``dfkit fix`` and ``dfkit season show`` write it) for home ranges.

Columns used: ``lat``, ``lon`` (WGS84 degrees), and when present ``tag``,
``status`` (without it every row with a position counts as ``ok``, and a warning
says so), ``time`` (ISO 8601), and the ellipse or covariance columns. Other
columns are kept. A row whose status says it has a position but whose ``lat`` or
``lon`` is missing, not a number or out of range is rejected with its line,
column and reason; rows of failed fixes (no position) are kept as they are.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit.io.sheet import read_sheet
from dfkit.problems import Problem, SheetError

#: Fix statuses that come with a position (as :data:`dfkit.locate.WITH_POSITION`; io reads, locate decides).
_LOCATED = ("ok", "no_region", "shallow", "long_span")
_NUMERIC = ("lat", "lon", "semi_major_m", "semi_minor_m", "orientation_deg", "level", "area_m2", "n_used",
            "n_bearings", "sd_deg", "cov_ee_m2", "cov_en_m2", "cov_nn_m2")


@dataclass
class FixTable:
    """A fix table read from a file: ``table`` (the usable rows), ``problems``, ``n_rows``, ``source``, and
    ``tags``: the tag of every data row, rejected or not (so no tag goes unreported)."""

    table: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    n_rows: int = 0
    source: str = ""
    tags: list[str] = field(default_factory=list)

    @property
    def n_rejected(self) -> int:
        return len({p.line for p in self.problems if p.severity == "error"})


def read_fix_table(path) -> FixTable:
    """Read a CSV table of fixes; every rejected row is reported (line, column, reason).

    Raises
    ------
    SheetError
        The file cannot be read, or has no ``lat``/``lon`` columns.
    """
    # The sheet reader gives line numbers, comments, quoted cells, encodings and formula guards as for bearings.
    raw = read_sheet(path, own_results="keep")
    name = raw.source
    problems: list[Problem] = list(raw.problems)
    header = raw.columns
    missing = [c for c in ("lat", "lon") if c not in header]
    if missing:
        raise SheetError(f"{name}: no {' or '.join(missing)} column: a fix table needs lat and lon (WGS84 degrees)")
    out = raw.table.copy()
    t = out
    bad = out["line"].isin({p.line for p in problems if p.severity == "error"}).to_numpy().copy()
    if "status" not in header:
        out["status"] = "ok"
        problems.append(Problem(1, "status", "no status column: every row with a position is taken as an ok fix",
                                "warning", name))
    if "tag" not in header:
        out["tag"] = ""
    status = out["status"].astype(str).str.strip().str.lower()
    out["status"] = status
    located = status.isin(_LOCATED).to_numpy()
    for c in _NUMERIC:
        if c not in out:
            continue
        text = out[c].astype(str).str.strip()
        num = pd.to_numeric(text.where(text != "", None), errors="coerce").to_numpy(float)
        if c in ("lat", "lon"):
            empty = (text == "").to_numpy()
            limit = 90.0 if c == "lat" else 180.0
            for i in np.flatnonzero(located & ~bad & (empty | ~np.isfinite(num) | (np.abs(num) > limit))):
                why = ("is missing" if empty[i] else f"'{text.iat[i]}' is not a number" if not np.isfinite(num[i])
                       else f"{num[i]:g} is outside -{limit:g}..{limit:g}")
                problems.append(Problem(int(out["line"].iat[i]), c, f"{c} {why} for a fix with status "
                                        f"'{status.iat[i]}'", "error", name))
                bad[i] = True
        out[c] = num
    if "time" in out:
        out["time"] = pd.to_datetime(out["time"].astype(str).where(out["time"].astype(str) != "", None), utc=True,
                                     errors="coerce", format="ISO8601")
    unknown = ~status.isin(_LOCATED).to_numpy() & (status == "").to_numpy()
    for i in np.flatnonzero(unknown & ~bad):
        problems.append(Problem(int(out["line"].iat[i]), "status", "the status is empty", "error", name))
        bad[i] = True
    return FixTable(table=out[~bad].reset_index(drop=True), problems=problems, n_rows=len(t), source=name,
                    tags=sorted({str(x) for x in out["tag"]}))
