"""Map tiles the user brings (a folder of XYZ tiles or an MBTiles file), embedded into the map file.

A browser cannot read an MBTiles file (SQLite) and a map file that points into a folder breaks when it is
sent to someone else, so the tiles that cover the data (with a margin) are embedded into the page as
``data:`` URIs, within a size budget. When the budget is too small for every zoom level, the most detailed
levels are left out and the map says so (the page then enlarges the most detailed level it has).

* XYZ folder: ``DIR/{z}/{x}/{y}.png`` (or ``.jpg``, ``.jpeg``, ``.webp``), rows counted from the north as in
  the common web-map tiling scheme.
* MBTiles (MBTiles 1.3 specification, Mapbox): a SQLite file with a ``tiles`` table (``zoom_level``,
  ``tile_column``, ``tile_row``, ``tile_data``); rows are counted from the south (TMS), so ``y = 2^z - 1 -
  tile_row``.
"""

from __future__ import annotations

import base64
import math
import os
import sqlite3
from dataclasses import dataclass, field

#: Default most bytes of tiles embedded into one map.
DEFAULT_BUDGET_BYTES = 15_000_000
_MIME = {b"\x89PNG": "image/png", b"\xff\xd8\xff": "image/jpeg", b"RIFF": "image/webp", b"GIF8": "image/gif"}


@dataclass
class EmbeddedTiles:
    """Tiles chosen for a map: ``tiles`` as ("z/x/y", data URI) pairs; ``notes`` say what was left out."""

    name: str
    tiles: list = field(default_factory=list)
    min_zoom: int = 0
    max_zoom: int = 0
    notes: list = field(default_factory=list)

    def spec(self) -> dict:
        return {"name": self.name, "tiles": self.tiles, "min_zoom": self.min_zoom, "max_zoom": self.max_zoom}


def tile_range(z: int, south: float, west: float, north: float, east: float):
    """x and y ranges (inclusive) of the web-map tiles at zoom ``z`` covering a box [°]."""
    n = 2 ** z

    def xt(lon):
        return min(n - 1, max(0, int(math.floor((lon + 180.0) / 360.0 * n))))

    def yt(lat):
        lat = max(min(lat, 85.05112878), -85.05112878)
        r = math.radians(lat)
        return min(n - 1, max(0, int(math.floor((1 - math.log(math.tan(r) + 1 / math.cos(r)) / math.pi) / 2 * n))))

    return (xt(west), xt(east)), (yt(north), yt(south))


def _mime(raw: bytes) -> str | None:
    for head, mime in _MIME.items():
        if raw.startswith(head):
            return mime
    return None


def _xyz_source(folder: str):
    """(z, x, y) -> path reader for a folder of XYZ tiles."""
    index = {}
    for zname in os.listdir(folder):
        if not zname.isdigit():
            continue
        zdir = os.path.join(folder, zname)
        for xname in os.listdir(zdir) if os.path.isdir(zdir) else []:
            if not xname.isdigit():
                continue
            xdir = os.path.join(zdir, xname)
            for fname in os.listdir(xdir) if os.path.isdir(xdir) else []:
                stem, ext = os.path.splitext(fname)
                if stem.isdigit() and ext.lower() in (".png", ".jpg", ".jpeg", ".webp"):
                    index[(int(zname), int(xname), int(stem))] = os.path.join(xdir, fname)

    def read(key):
        with open(index[key], "rb") as fh:
            return fh.read()
    return index.keys(), read


def _mbtiles_source(path: str):
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        keys = [(int(z), int(x), (1 << int(z)) - 1 - int(r))
                for z, x, r in con.execute("SELECT zoom_level, tile_column, tile_row FROM tiles")]
    except sqlite3.DatabaseError as err:
        con.close()
        raise ValueError(f"tiles={path!r} is not an MBTiles file: {err}") from None
    con.close()

    def read(key):
        z, x, y = key
        c = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        try:
            row = c.execute("SELECT tile_data FROM tiles WHERE zoom_level=? AND tile_column=? AND tile_row=?",
                            (z, x, (1 << z) - 1 - y)).fetchone()
        finally:
            c.close()
        return bytes(row[0]) if row else b""
    return keys, read


def load_tiles(path, bounds, *, budget_bytes: int = DEFAULT_BUDGET_BYTES, margin: float = 0.5) -> EmbeddedTiles:
    """The user's tiles covering ``bounds`` (south, west, north, east [°]) grown by ``margin`` of its size.

    Parameters
    ----------
    path : str or path-like
        A folder of XYZ tiles or an ``.mbtiles`` file.
    bounds : tuple of float
        The data's box; tiles outside it (plus the margin) are not embedded.
    budget_bytes : int
        Most bytes of tiles to embed; the most detailed zoom levels are dropped first.
    """
    path = os.fspath(path)
    if os.path.isdir(path):
        keys, read = _xyz_source(path)
    elif os.path.isfile(path):
        keys, read = _mbtiles_source(path)
    else:
        raise ValueError(f"tiles={path!r}: no such folder or MBTiles file")
    name = os.path.basename(os.path.normpath(path))
    s, w, n, e = bounds
    dy, dx = max(n - s, 0.01) * margin, max(e - w, 0.01) * margin
    s, w, n, e = s - dy, w - dx, n + dy, e + dx
    by_zoom = {}
    for z, x, y in keys:
        (x0, x1), (y0, y1) = tile_range(z, s, w, n, e)
        if x0 <= x <= x1 and y0 <= y <= y1:
            by_zoom.setdefault(z, []).append((x, y))
    out = EmbeddedTiles(name)
    if not by_zoom:
        out.notes.append(f"the tiles in {name} do not cover the data: none embedded")
        return out
    used = 0
    kept = []
    for z in sorted(by_zoom):
        batch, size = [], 0
        for x, y in sorted(by_zoom[z]):
            raw = read((z, x, y))
            mime = _mime(raw)
            if mime is None:
                continue
            uri = f"data:{mime};base64,{base64.b64encode(raw).decode('ascii')}"
            batch.append((f"{z}/{x}/{y}", uri))
            size += len(uri)
        if used + size > budget_bytes:
            left = [k for k in sorted(by_zoom) if k >= z]
            out.notes.append(f"tiles of zoom {left[0]}-{left[-1]} from {name} left out to keep the map under "
                             f"{budget_bytes / 1e6:g} MB; the map enlarges zoom {kept[-1] if kept else z - 1} instead")
            break
        out.tiles.extend(batch)
        used += size
        kept.append(z)
    if kept:
        out.min_zoom, out.max_zoom = kept[0], kept[-1]
    else:
        out.notes.append(f"no tiles from {name} fit in the size budget")
    return out
