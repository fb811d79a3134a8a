"""The season review page: one self-contained HTML file that works offline.

It shows, for the fixes chosen: a per-tag table (fixes, share ok, median region
area, date range), a map with a time filter and per-tag tracks
(:mod:`dfkit.season.review_map`), the distribution of region areas and their
daily median over the season (inline SVG drawn here, no script needed), the
flagged and failed fixes with their reasons, the rows each import rejected, and
the imports themselves. All user text is escaped.
"""

from __future__ import annotations

import html
import math

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.locate import WITH_POSITION, Fixes
from dfkit.season.query import SeasonFilter
from dfkit.season.review_map import season_map_html, tag_colours
from dfkit.season.summary import tag_summary

#: Rows shown in the long tables of the page (the rest are counted).
MAX_ROWS = 1000


class ReviewPage:
    """A review page: ``save(path)`` writes it; in a notebook it shows itself.

    Attributes
    ----------
    summary : pandas.DataFrame
        The per-tag table (:func:`dfkit.season.summary.tag_summary`).
    """

    def __init__(self, fixes: Fixes, *, title: str = "Season review", imports: pd.DataFrame | None = None,
                 problems: pd.DataFrame | None = None, selection: str = "all fixes"):
        self.fixes = fixes
        self.table = table = fixes.table
        self.title = title
        self.imports = imports if imports is not None else pd.DataFrame()
        self.problems = problems if problems is not None else pd.DataFrame()
        self.selection = selection
        self.summary = tag_summary(table)

    def html(self) -> str:
        """The complete page."""
        colours = tag_colours(self.table["tag"]) if len(self.table) else {}
        parts = [f"<h1>{_e(self.title)}</h1>",
                 f"<p class='sel'>Fixes shown: {_e(self.selection)}; "
                 f"{len(self.table)} {'fix' if len(self.table) == 1 else 'fixes'}.</p>",
                 f"<p class='caution'>{_e(CAUTION)}</p>",
                 "<h2>Per tag</h2>", self._summary_html(colours),
                 "<h2>Map</h2>", self._map_html(),
                 "<h2>Region areas</h2>",
                 "<p>Area of each fix's confidence region (ok fixes; logarithmic scale). Larger means less "
                 "certain; the daily median shows whether the fixes got better or worse over the season.</p>",
                 _histogram_svg(self.table, colours), _daily_svg(self.table, colours),
                 "<h2>What whole sheets showed</h2>", self._sheet_findings_html(),
                 "<h2>Flagged and failed fixes</h2>", self._flagged_html(),
                 "<h2>Rejected rows</h2>", self._problems_html(),
                 "<h2>Imports</h2>", self._imports_html()]
        return _PAGE.format(title=_e(self.title), body="\n".join(parts))

    def save(self, path) -> None:
        with atomic_write(path) as fh:
            fh.write(self.html())

    def _repr_html_(self) -> str:
        return (f'<iframe srcdoc="{html.escape(self.html(), quote=True)}" style="width:100%;height:900px;'
                'border:1px solid #ccc" sandbox="allow-scripts"></iframe>')

    def _map_html(self) -> str:
        if not self.table["status"].isin(WITH_POSITION).any():
            return "<p>No fix with a position to show.</p>"
        return ("<p>Each tag's fixes are joined in time order (its track); the panel of the map filters tags, "
                "time and flagged fixes.</p>" + season_map_html(self.fixes, title=self.title))

    def _summary_html(self, colours) -> str:
        s = self.summary
        rows = []
        for _, r in s.iterrows():
            dot = f"<span class='dot' style='background:{colours.get(r['tag'], '#888')}'></span>"
            rows.append("<tr>" + "".join([
                f"<td>{dot}{_e(r['tag'])}</td>", f"<td>{r['fixes']}</td>", f"<td>{r['ok']}</td>",
                f"<td>{r['share_ok'] * 100:.0f}%</td>", f"<td>{_area(r['median_area_m2'])}</td>",
                f"<td>{_when(r['first'])}</td>", f"<td>{_when(r['last'])}</td>", f"<td>{r['bearings']}</td>"]) + "</tr>")
        head = ("<tr><th>tag</th><th>fixes</th><th>ok</th><th>share ok</th><th>median region (ok)</th>"
                "<th>first</th><th>last</th><th>bearings</th></tr>")
        return f"<table>{head}{''.join(rows)}</table>" if rows else "<p>No fixes.</p>"

    def _flagged_html(self) -> str:
        bad = self.table[self.table["status"].astype(str) != "ok"]
        if not len(bad):
            return "<p>None: every fix shown is ok.</p>"
        cols = ["time", "tag", "fix", "status", "reason"] + (["source"] if "source" in bad else [])
        rows = ["<tr>" + "".join(f"<td>{_cell(r[c], c)}</td>" for c in cols) + "</tr>"
                for _, r in bad.head(MAX_ROWS).iterrows()]
        more = f"<p>... and {len(bad) - MAX_ROWS} more.</p>" if len(bad) > MAX_ROWS else ""
        return ("<table><tr>" + "".join(f"<th>{c}</th>" for c in cols) + "</tr>" + "".join(rows) + "</table>" + more)

    def _sheet_findings_html(self) -> str:
        """Warnings about a sheet as a whole (line 0): an observer reading off, an SD given too small
        (:mod:`dfkit.locate.sheetwide`), kept with each import."""
        p = self.problems
        if len(p) and {"severity", "line"} <= set(p.columns):
            p = p[(p["severity"] == "warning") & (p["line"].fillna(0).astype(int) == 0)]
        else:
            p = p.iloc[0:0] if len(p) else p
        if not len(p):
            return "<p>Nothing: no observer, team, antenna or receiver read off, and no SD looked too small.</p>"
        items = "".join(f"<li><b>{_e(r['file_name'])}</b>: {_e(r['message'])}</li>" for _, r in p.head(MAX_ROWS).iterrows())
        return f"<ul class='sheet-findings'>{items}</ul>"

    def _problems_html(self) -> str:
        p = self.problems
        if not len(p):
            return "<p>None recorded for these imports.</p>"
        p = p[p["severity"] == "error"] if "severity" in p else p
        if not len(p):
            return "<p>No rejected rows (warnings only).</p>"
        rows = [f"<tr><td>{_e(r['file_name'])}</td><td>{int(r['line'])}</td><td>{_e(r['column_name'])}</td>"
                f"<td>{_e(r['message'])}</td></tr>" for _, r in p.head(MAX_ROWS).iterrows()]
        more = f"<p>... and {len(p) - MAX_ROWS} more.</p>" if len(p) > MAX_ROWS else ""
        return ("<table><tr><th>file</th><th>line</th><th>column</th><th>reason</th></tr>" + "".join(rows)
                + "</table>" + more)

    def _imports_html(self) -> str:
        i = self.imports
        if not len(i):
            return "<p>None.</p>"
        rows = [f"<tr><td>{int(r['import_id'])}</td><td>{_e(r['file_name'])}</td><td>{_when(r['imported_utc'])}</td>"
                f"<td>{r['n_rows']}</td><td>{r['n_rejected']}</td><td>{r['n_fixes_added']}</td>"
                f"<td>{r['n_fixes_known']}</td><td>{r['n_fixes_changed']}</td><td>{_e(r['dfkit_version'])}</td>"
                f"<td><code>{_e(str(r['file_sha256'])[:12])}</code></td></tr>" for _, r in i.iterrows()]
        return ("<table><tr><th>import</th><th>file</th><th>when</th><th>rows</th><th>rejected</th>"
                "<th>fixes added</th><th>already stored</th><th>changed</th><th>dfkit</th><th>sha256</th></tr>"
                + "".join(rows) + "</table>")


def review_page(store, flt: SeasonFilter | None = None, *, title: str = "Season review") -> ReviewPage:
    """The review page of the fixes of a season store that the filter keeps."""
    flt = flt or SeasonFilter()
    fixes = store.select(flt, with_bearings=False)
    table = fixes.table
    ids = sorted({int(x) for x in table["import_id"]}) if len(table) else []
    imports = store.imports()
    if ids:
        imports = imports[imports["import_id"].isin(ids)]
    return ReviewPage(fixes, title=title, imports=imports, problems=store.problems(ids), selection=flt.describe())


# ------------------------------------------------------------------ drawing

def _e(text) -> str:
    return html.escape("" if text is None else str(text))


def _when(t) -> str:
    return "" if t is None or pd.isna(t) else pd.Timestamp(t).strftime("%Y-%m-%d %H:%M")


def _area(a) -> str:
    if a is None or not np.isfinite(a):
        return ""
    return f"{a / 1e4:.2f} ha" if a >= 1e4 else f"{a:.0f} m²"


def _cell(v, col) -> str:
    return _when(v) if col == "time" else _e(v)


def _ok_areas(table):
    ok = table[(table["status"].astype(str) == "ok")]
    a = pd.to_numeric(ok["area_m2"], errors="coerce")
    good = np.isfinite(a.to_numpy(float)) & (a.to_numpy(float) > 0)
    return ok[good], np.log10(a.to_numpy(float)[good])


def _histogram_svg(table, colours, width=640, height=220) -> str:
    ok, la = _ok_areas(table)
    if not len(la):
        return "<p>No ok fix has a region.</p>"
    step = 0.1                                   # a tenth of a decade per bar
    lo, hi = math.floor(la.min() / step) * step, math.ceil(la.max() / step) * step + step
    edges = np.arange(lo, hi + 1e-9, step)
    tags = sorted(colours)
    counts = {t: np.histogram(la[ok["tag"].astype(str).to_numpy() == t], edges)[0] for t in tags}
    total = sum(counts.values())
    top = max(int(total.max()), 1)
    pad, w_bar = 40, (width - 60) / (len(edges) - 1)
    out = [f"<svg class='chart' width='{width}' height='{height}' role='img' aria-label='histogram of region areas'>"]
    base = np.zeros(len(edges) - 1)
    for t in tags:
        for k, c in enumerate(counts[t]):
            if c:
                h = (height - 60) * c / top
                y = height - 30 - (height - 60) * base[k] / top - h
                out.append(f"<rect x='{pad + k * w_bar:.1f}' y='{y:.1f}' width='{w_bar - 1:.1f}' height='{h:.1f}' "
                           f"fill='{colours[t]}'><title>{_e(t)}: {c}</title></rect>")
        base += counts[t]
    for e in range(math.floor(lo), math.ceil(edges[-1]) + 1):
        for mult in (1, 2, 5):
            v = math.log10(mult) + e
            if lo <= v <= edges[-1]:
                x = pad + (v - lo) / step * w_bar
                out.append(f"<line x1='{x:.1f}' x2='{x:.1f}' y1='{height - 30}' y2='{height - 25}' stroke='#333'/>"
                           f"<text x='{x:.1f}' y='{height - 12}' text-anchor='middle'>{_area(10.0 ** v)}</text>")
    out.append(f"<text x='{pad}' y='14'>fixes per tenth of a decade of area (highest bar {top}); "
               "region area on a logarithmic scale</text></svg>")
    return "".join(out)


def _daily_svg(table, colours, width=640, height=200) -> str:
    ok, la = _ok_areas(table)
    t = pd.to_datetime(ok["time"], utc=True)
    has = t.notna().to_numpy()
    if has.sum() < 2:
        return ""
    df = pd.DataFrame({"tag": ok["tag"].astype(str).to_numpy()[has], "day": t[has].dt.floor("D").to_numpy(),
                       "la": la[has]})
    med = df.groupby(["tag", "day"])["la"].median().reset_index()
    d0, d1 = med["day"].min(), med["day"].max()
    span = max((d1 - d0) / pd.Timedelta(days=1), 1.0)
    y0, y1 = med["la"].min() - 0.1, med["la"].max() + 0.1
    pad = 50

    def xy(day, v):
        x = pad + (width - pad - 20) * ((day - d0) / pd.Timedelta(days=1)) / span
        y = height - 30 - (height - 50) * (v - y0) / (y1 - y0)
        return f"{x:.1f},{y:.1f}"

    out = [f"<svg class='chart' width='{width}' height='{height}' role='img' aria-label='daily median region area'>"]
    for tg, g in med.groupby("tag"):
        pts = " ".join(xy(d, v) for d, v in zip(g["day"], g["la"]))
        out.append(f"<polyline points='{pts}' fill='none' stroke='{colours.get(tg, '#888')}' stroke-width='1.5'>"
                   f"<title>{_e(tg)}</title></polyline>")
    out.append(f"<text x='{pad}' y='14'>daily median region area, {_area(10 ** y0)} to {_area(10 ** y1)}</text>"
               f"<text x='{pad}' y='{height - 8}'>{d0:%Y-%m-%d}</text>"
               f"<text x='{width - 20}' y='{height - 8}' text-anchor='end'>{d1:%Y-%m-%d}</text></svg>")
    return "".join(out)


_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<style>
body {{ font: 14px/1.4 system-ui, sans-serif; margin: 1em auto; max-width: 1000px; padding: 0 1em; color: #222; }}
table {{ border-collapse: collapse; margin: 0.5em 0; }}
td, th {{ border-bottom: 1px solid #ddd; padding: 2px 8px; text-align: left; vertical-align: top; }}
.caution {{ background: #fff4e0; border-left: 4px solid #E69F00; padding: 4px 8px; }}
.dot {{ display: inline-block; width: 10px; height: 10px; border-radius: 5px; margin-right: 6px; }}
svg.chart text {{ font-size: 11px; fill: #333; }}
</style>
</head>
<body>
{body}
</body>
</html>
"""
