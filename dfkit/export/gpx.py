"""GPX 1.1 waypoints, written with gpxpy: one per fix that has a position, to walk to with a hand-held GPS.

Options (:class:`~dfkit.export.WriteOptions`):

* Waypoint names are unique (a receiver may keep only one of two waypoints with one name, and some compare
  names without regard to case: common practice, no single source): a fix label that several tags use is
  written ``<tag> <label>``; any name still taken gets a ``~2``, ``~3`` ... ending. Names never start or end
  with a space.
* ``gpx_name_length``: hand-held receivers show only the first few characters of a waypoint name (how many
  depends on the model: common practice, no single source). With a length, each label is cut to it (spaces at
  the cut trimmed) and made unique the same way; the full fix label and tag stay in the comment.
* ``gpx_tz``: write waypoint times in this time zone (ISO 8601 with its offset, e.g. ``+02:00``) instead of UTC.

Any label becomes valid XML: characters XML 1.0 does not allow (control characters, lone surrogates) are
written as a visible ``\\xNN`` / ``\\uNNNN`` escape, never dropped silently.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.locate import WITH_POSITION, Fixes

# Characters outside XML 1.0's Char production (W3C XML 1.0, 5th ed., section 2.2). A pattern, not compiled here:
# compiling this class takes 15-30 ms, which every `dfkit` command paid at import; `re` compiles it on first use and
# keeps it in its own cache.
_NOT_XML = "[^\u0009\u000a\u000d\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]"


def xml_text(value) -> str:
    """Text that XML 1.0 can carry: disallowed characters become a visible escape (``\\x07``)."""
    text = "" if value is None or (isinstance(value, float) and not np.isfinite(value)) else str(value)

    def escape(m):
        return f"\\x{ord(m.group()):02x}" if ord(m.group()) < 256 else f"\\u{ord(m.group()):04x}"

    return re.sub(_NOT_XML, escape, text)


def _unique(names: list[str], length: int | None) -> list[str]:
    """Names made unique (compared without regard to case) with a ``~k`` ending, within ``length``."""
    out, seen = [], set()
    for name in names:
        base = name.strip() or "fix"
        cand, k = base, 2
        while cand.casefold() in seen:
            end = f"~{k}"
            cand = (base[:length - len(end)] if length else base).rstrip() + end
            k += 1
        seen.add(cand.casefold())
        out.append(cand)
    return out


def short_names(labels, length: int) -> list[str]:
    """Labels cut to ``length`` characters (spaces at the cut trimmed), made unique with a ``~k`` ending."""
    if length < 3:
        raise ValueError(f"gpx_name_length={length!r} must be at least 3 characters")
    return _unique([lab.strip()[:length].rstrip() for lab in labels], length)


def waypoint_names(labels, tags) -> list[str]:
    """Unique waypoint names: the fix label, ``<tag> <label>`` where several tags use that label."""
    labels = [lab.strip() for lab in labels]
    tags = [t.strip() for t in tags]
    tags_of: dict = {}
    for lab, tag in zip(labels, tags):
        tags_of.setdefault(lab, set()).add(tag)
    return _unique([f"{tag} {lab}" if len(tags_of[lab]) > 1 and tag else lab
                    for lab, tag in zip(labels, tags)], None)


def _description(r) -> str:
    desc = f"status {r['status']}; {r['n_bearings']} bearings; method {r['method']}"
    if np.isfinite(r["semi_major_m"]):
        desc += (f"; {r['level'] * 100:g}% ellipse semi-axes {r['semi_major_m']:.0f} m and {r['semi_minor_m']:.0f} m "
                 f"(major axis at {r['orientation_deg']:.0f} deg)")
    if r["reason"]:
        desc += f"; {r['reason']}"
    return desc


def to_gpx(fixes: Fixes, options=None) -> str:
    """GPX 1.1 text with one waypoint per fix that has a position."""
    import gpxpy.gpx

    name_length = getattr(options, "gpx_name_length", None)
    tz = getattr(options, "gpx_tz", None)
    t = fixes.table[fixes.table["status"].isin(WITH_POSITION)]
    labels = [xml_text(v) for v in t["fix"]]
    names = (short_names(labels, int(name_length)) if name_length else
             waypoint_names(labels, [xml_text(v) for v in t["tag"]]))
    times = t["time"]
    if tz:
        times = times.dt.tz_convert(tz)
    gpx = gpxpy.gpx.GPX()
    gpx.creator = "dfkit"
    gpx.description = CAUTION
    for (_, r), name, label, when in zip(t.iterrows(), names, labels, times):
        tag = xml_text(r["tag"])
        w = gpxpy.gpx.GPXWaypoint(latitude=round(float(r["lat"]), 7), longitude=round(float(r["lon"]), 7),
                                  name=name, description=xml_text(_description(r)), type=xml_text(r["status"]),
                                  time=None if pd.isna(when) else when.to_pydatetime(),
                                  comment=f"fix {label}" + (f", tag {tag}" if tag else ""))
        gpx.waypoints.append(w)
    return gpx.to_xml(version="1.1")


def write_gpx(fixes: Fixes, path, options=None) -> None:
    """Write :func:`to_gpx` to ``path`` atomically."""
    text = to_gpx(fixes, options)
    with atomic_write(path) as fh:
        fh.write(text)
