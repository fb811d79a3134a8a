"""GPX 1.1 waypoints: one per fix that has a position, to walk to with a hand-held GPS."""

from __future__ import annotations

from xml.sax.saxutils import escape

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.locate import WITH_POSITION, Fixes


def to_gpx(fixes: Fixes) -> str:
    """GPX 1.1 with one waypoint per fix that has a position (to walk to it with a hand-held GPS)."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<gpx version="1.1" creator="dfkit" xmlns="http://www.topografix.com/GPX/1/1">',
           f"<metadata><desc>{escape(CAUTION)}</desc></metadata>"]
    for _, r in fixes.table.iterrows():
        if r["status"] not in WITH_POSITION:
            continue
        desc = f"status {r['status']}; {r['n_bearings']} bearings; method {r['method']}"
        if np.isfinite(r["semi_major_m"]):
            desc += (f"; {r['level'] * 100:g}% ellipse {r['semi_major_m']:.0f} x {r['semi_minor_m']:.0f} m "
                     f"at {r['orientation_deg']:.0f} deg")
        if r["reason"]:
            desc += f"; {r['reason']}"
        out.append(f'<wpt lat="{r["lat"]:.7f}" lon="{r["lon"]:.7f}">')
        if pd.notna(r["time"]):
            out.append(f"<time>{r['time'].strftime('%Y-%m-%dT%H:%M:%SZ')}</time>")
        out.append(f"<name>{escape(str(r['fix']))}</name><desc>{escape(desc)}</desc>"
                   f"<type>{escape(r['status'])}</type></wpt>")
    out.append("</gpx>")
    return "\n".join(out) + "\n"


def write_gpx(fixes: Fixes, path) -> None:
    """Write :func:`to_gpx` to ``path`` (atomically)."""
    with atomic_write(path) as fh:
        fh.write(to_gpx(fixes))
