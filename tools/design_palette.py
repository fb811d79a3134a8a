"""Search for dfkit's categorical map palette: colours that stay apart for common colour-vision deficiencies.

Candidates are drawn (seeded) from sRGB; a greedy max-min search keeps the set whose smallest pairwise distance
in CAM02-UCS (Luo, Cui & Li 2006), taken over normal vision and simulated protanomaly, deuteranomaly and
tritanomaly at full severity (Machado, Oliveira & Fernandes 2009, as implemented in colorspacious), is largest,
while every colour keeps a distance from the light map background, from white (hollow markers) and from the
grey of the grid, and is a colour rather than a grey.

    python tools/design_palette.py [--n 8]
"""

from __future__ import annotations

import argparse

import numpy as np
from colorspacious import cspace_convert

FIRST = "#1f5fbf"   # start from a mid blue, the colour of a single tag
VISIONS = [None, "protanomaly", "deuteranomaly", "tritanomaly"]
BACKGROUND = ["#f4f2ec", "#ffffff", "#9a9a9a"]   # map background, hollow marker fill, grid and borders


def ucs(rgb01, cvd):
    x = np.clip(rgb01, 0, 1)
    if cvd is not None:
        x = np.clip(cspace_convert(x, {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}, "sRGB1"), 0, 1)
    return cspace_convert(x, "sRGB1", "CAM02-UCS")


def hex01(h):
    return np.array([int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=8)
    a = ap.parse_args()
    rng = np.random.default_rng(2026)
    cand = rng.uniform(0, 1, (4000, 3))
    views = [ucs(cand, v) for v in VISIONS]
    bg = np.array([hex01(h) for h in BACKGROUND])
    bgv = [ucs(bg, v) for v in VISIONS]
    # distance of each candidate from the backgrounds, worst vision
    dbg = np.min([np.linalg.norm(vw[:, None] - b[None], axis=2).min(1) for vw, b in zip(views, bgv)], axis=0)
    jmh = cspace_convert(cand, "sRGB1", "CAM02-UCS")
    chroma = np.hypot(jmh[:, 1], jmh[:, 2])
    light = jmh[:, 0]
    # a colour (not a grey) of middle lightness: visible on the light background, as a line and as a dot
    ok = (dbg > 25) & (chroma > 25) & (light > 30) & (light < 72)
    idx = [int(np.argmin(np.where(ok, np.linalg.norm(cand - hex01(FIRST), axis=1), np.inf)))]
    for _ in range(a.n - 1):
        dmin = np.full(len(cand), np.inf)
        for vw in views:
            d = np.linalg.norm(vw[:, None] - vw[idx][None], axis=2).min(1)
            dmin = np.minimum(dmin, d)
        dmin[~ok] = -1
        idx.append(int(np.argmax(dmin)))
    pal = ["#" + "".join(f"{round(v * 255):02x}" for v in cand[i]) for i in idx]
    worst = min(np.linalg.norm(vw[idx][i] - vw[idx][j]) for vw in views
                for i in range(len(idx)) for j in range(i))
    print("palette:", pal)
    print(f"smallest pairwise CAM02-UCS distance over the four visions: {worst:.1f}")
    print("time ramp:", ramp())


def ramp(stops=("#232562", "#a23b72", "#e8a33c"), n=7):
    """The time ramp: three anchors joined by straight segments in CAM02-UCS, sampled at n stops."""
    anchors = cspace_convert(np.array([hex01(h) for h in stops]), "sRGB1", "CAM02-UCS")
    t = np.linspace(0, len(stops) - 1, n)
    k = np.minimum(t.astype(int), len(stops) - 2)
    f = (t - k)[:, None]
    pts = anchors[k] * (1 - f) + anchors[k + 1] * f
    rgb = np.clip(cspace_convert(pts, "CAM02-UCS", "sRGB1"), 0, 1)
    return ["#" + "".join(f"{round(v * 255):02x}" for v in c) for c in rgb]


if __name__ == "__main__":
    main()
