"""Bearings: the usable bearings of a sheet in one convention, what was refused, and the fixes."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit.policy import DEFAULT_WINDOW_MIN
from dfkit.problems import Problem

#: Columns of the normalized table, in order (carried columns follow).
NORMALIZED_COLUMNS = [
    "line", "fix_id", "fix", "tag", "time", "lat", "lon", "true_bearing", "sd", "sd_source", "declination", "convergence",
    "bearing", "unit", "north", "position_from", "grouped_by", "declination_sd",
]


@dataclass
class Bearings:
    """Usable bearings in one convention, and what could not be used.

    A fix is identified by its tag *and* its label: two tags that both number their
    fixes 1, 2, 3 ... have different fixes.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per usable bearing (columns :data:`NORMALIZED_COLUMNS`, then the
        sheet's own extra columns). ``fix_id`` is the row of :attr:`fix_index`
        the bearing belongs to.
    problems : list of Problem
        Every rejected row (severity 'error') and every warning.
    fix_index : pandas.DataFrame
        One row per fix of the input, indexed by ``fix_id`` (0, 1, ...), in order of
        first appearance, *including* fixes whose rows were all rejected: ``fix``
        (label), ``tag``, ``rejected_lines`` (list of line numbers; an empty one is shared
        by the fixes without rejected rows and refuses changes).
    n_rows : int
        Data rows read from the sheet.
    notes : list of str
        What dfkit did that the user should know (grouping, models used).
    window_min : float
        The grouping window [min]: the largest gap between successive bearings of a
        fix; :func:`dfkit.locate.locate` flags fixes by it (see :meth:`fix_timing`).
    doubts : dict of int to str
        Input lines whose position rests on a reading the sheet does not settle (a UTM
        zone letter S read as a band or a hemisphere only from rows of other zones), and
        why: :func:`dfkit.locate.locate` marks their fixes ``ambiguous`` and says so.
    """

    table: pd.DataFrame
    problems: list[Problem]
    fix_index: pd.DataFrame
    n_rows: int = 0
    notes: list[str] = field(default_factory=list)
    source: str = ""
    window_min: float = DEFAULT_WINDOW_MIN
    doubts: dict = field(default_factory=dict)

    @property
    def n_rejected(self) -> int:
        return len({p.line for p in self.problems if p.severity == "error" and p.line})

    @property
    def labels(self) -> list[str]:
        """The fix label of every fix (a label may repeat across tags)."""
        return self.fix_index["fix"].tolist()

    def select(self, mask=None, *, tags=None, fixes=None) -> "Bearings":
        """A subset of these bearings, as a new :class:`Bearings`.

        Parameters
        ----------
        mask : array_like of bool, optional
            Rows of :attr:`table` to keep.
        tags : str or iterable of str, optional
            Keep the fixes of these tags (including their fixes with no usable bearing).
        fixes : str or iterable of str, optional
            Keep the fixes with these labels.

        Fix ids are renumbered; problems are kept for the lines of the kept fixes and
        for the sheet as a whole.
        """
        t = self.table
        keep_fix = np.ones(len(self.fix_index), bool)
        if tags is not None:
            tags = [tags] if isinstance(tags, str) else list(tags)
            keep_fix &= self.fix_index["tag"].isin(tags).to_numpy()
        if fixes is not None:
            fixes = [fixes] if isinstance(fixes, str) else list(fixes)
            keep_fix &= self.fix_index["fix"].isin(fixes).to_numpy()
        rows = keep_fix[t["fix_id"].to_numpy(dtype=np.int64)] if len(t) else np.zeros(0, bool)
        if mask is not None:
            rows &= np.asarray(mask, bool)
            has_rows = np.zeros(len(keep_fix), bool)
            has_rows[t["fix_id"].to_numpy(dtype=np.int64)[rows]] = True
            keep_fix &= has_rows
        old_ids = np.flatnonzero(keep_fix)
        new_id = np.full(len(keep_fix), -1, np.int64)
        new_id[old_ids] = np.arange(len(old_ids))
        table = t[rows].copy()
        table["fix_id"] = new_id[table["fix_id"].to_numpy(dtype=np.int64)]
        fix_index = self.fix_index.iloc[old_ids].reset_index(drop=True)
        fix_index.index.name = "fix_id"
        lines = set(table["line"].tolist())
        for rl in fix_index["rejected_lines"]:
            lines.update(rl)
        problems = [p for p in self.problems if p.line in lines or p.line <= 1 or p.source != self.source]
        return Bearings(table=table.reset_index(drop=True), problems=problems, fix_index=fix_index,
                        n_rows=len(table) + sum(len(r) for r in fix_index["rejected_lines"]), notes=list(self.notes),
                        source=self.source, window_min=self.window_min,
                        doubts={k: v for k, v in self.doubts.items() if k in lines})

    def fix_timing(self) -> pd.DataFrame:
        """Per fix (indexed by ``fix_id``): ``span_min``, the time from its first to its last
        usable bearing, and ``max_gap_min``, the largest gap between successive bearings
        [min] (NaN without times). :func:`dfkit.locate.locate` flags fixes whose gap
        exceeds the window or whose span exceeds
        :data:`dfkit.policy.FIX_SPAN_WINDOWS` windows."""
        m = len(self.fix_index)
        span = np.full(m, np.nan)
        gap = np.full(m, np.nan)
        t = self.table
        if len(t):
            secs = (t["time"] - pd.Timestamp("1970-01-01", tz="UTC")).dt.total_seconds().to_numpy(float)
            g = t["fix_id"].to_numpy(np.int64)
            ok = np.isfinite(secs) & (g >= 0)
            if ok.any():
                order = np.lexsort((secs[ok], g[ok]))
                gg, ss = g[ok][order], secs[ok][order]
                same = gg[1:] == gg[:-1]
                d = np.where(same, np.diff(ss), 0.0)
                gap_s = np.zeros(m)
                np.maximum.at(gap_s, gg[1:], d)
                lo = np.full(m, np.inf)
                hi = np.full(m, -np.inf)
                np.minimum.at(lo, gg, ss)
                np.maximum.at(hi, gg, ss)
                has = np.isfinite(lo)
                span[has] = (hi[has] - lo[has]) / 60.0
                gap[has] = gap_s[has] / 60.0
        return pd.DataFrame({"span_min": span, "max_gap_min": gap}, index=self.fix_index.index)
