"""How often, and how far, this sheet's bearings go wild: the wild risk weighed at the sheet's own rate.

The wild risk (:mod:`dfkit.locate.wild`) weighs "one bearing of the fix is wild" with a prior: a share
``wild_share`` of bearings, each equally likely in every direction (density 1 / (2 pi)). A sheet whose wild
bearings are more common, or come mostly from a few tens of degrees off (a reflection off a ridge, a side lobe),
has far more of them just where a three-line fix can absorb one: there the uniform prior makes a wrong fix look
safe. A reviewer's sheet with one line in ten 20-60° off left 181 three-line fixes ``ok`` and wrong (Dec 2026).

What the sheet shows, it shows in its fixes of four or more lines with a known SD: a bearing that misses its fix
by :data:`CLEAR_SDS` of its SDs or more while the rest of its fix agrees is wild beyond doubt (a good bearing does
so about once in 1.7 million), and its miss is how far it went; one a fix, as a fit that keeps a wild line pulls
the good ones off with it. Wild lines nearer than that cannot be told from good ones and are not counted, so the
rate learnt is low where they are common (a reviewer's sheets with lines 15-45° off and SDs of 5-8°: the ok
fixes' risks summed to a fifth of the misses the wild lines caused; Dec 2026). :func:`learn` counts them in bins of the miss, each bin over the bearings that
could have shown a miss there (those whose SD puts the bin beyond the cut: the counts are corrected for the misses
a bearing with a wide SD cannot show), and turns each bin into a density of wild bearings per radian of miss.
That is the mixing density of a contaminated model estimated from the clear outliers (an empirical Bayes step,
H. Robbins, 1956, *Proc. Third Berkeley Symposium*, vol. 1, pp. 157-163 [from memory]).

The wild risk then weighs Hk with the larger of the prior's density and the sheet's, at bearing k's miss under Hk
(:meth:`WildLines.log_raise`): the sheet only raises the prior's density, never lowers it, and only by
:data:`MIN_RAISE` or more; a sheet without enough clear wild bearings (:data:`MIN_WILD`) changes nothing. A fix's
risk mostly rises with it, but can fall: where the line a robust fit dropped becomes likelier to be the wild one,
the other explanations weigh less. Every fix with a wild risk is
then weighed again (:func:`dfkit.locate.core.locate`), and the sheet gets a note saying what was learnt.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit.locate.fixes import KNOWN_SD_SOURCES
from dfkit.policy import INCONSISTENT_P
from dfkit.regions import chi2_sf

#: The ways of weighing the wild risk (:func:`dfkit.locate.locate`'s ``wild_rate``): at the sheet's own rate where
#: it shows more wild lines than the prior, or at the prior's alone.
RATES = ("sheet", "prior")
#: A bearing at least this many of its SDs off its fix is a clear wild line (our choice: the two-sided normal tail
#: beyond 5 SD is 5.7e-7; the residual of a kept good line at its fix is smaller than its SD, that of a line a
#: robust fit dropped about its SD times sqrt(1 + h), h < 1).
CLEAR_SDS = 5.0
#: Fewest bearings of four-or-more-line fixes a sheet must show before its wild lines are learnt, and fewest clear
#: wild lines; a bin of the miss needs MIN_BIN of them (our choices: below, a bin's count is too rough to act on).
MIN_LINES = 200
MIN_WILD = 20
MIN_BIN = 5
#: A bin raises the prior only by this factor or more (our choice: on sheets wild exactly as the prior says, 5 %
#: in any direction, bins came out at 1.0-1.8 times by chance).
MIN_RAISE = 1.5
#: A group label (observer, team, antenna, receiver) is named in the note when it holds at least this share of the
#: clear wild lines and at least twice its share of the bearings (our choice).
LABEL_SHARE = 0.5
#: Bins of the miss [°], either side.
EDGES_DEG = np.array([0.0, 10.0, 20.0, 30.0, 40.0, 50.0, 60.0, 75.0, 90.0, 120.0, 150.0, 180.0])
#: Fewest bearings in a fix whose misses are counted (with three, one wild line pulls the fix toward itself and
#: the other two look as far off as it does).
MIN_FIX_LINES = 4


@dataclass(frozen=True)
class WildLines:
    """What a sheet's clear wild bearings say, against the prior ``share`` spread evenly."""

    share: float
    #: per bin of EDGES_DEG: clear wild lines counted, bearings that could show it (corrected), and the density of
    #: wild lines there as prior odds per radian
    counts: np.ndarray
    exposed: np.ndarray
    density: np.ndarray
    #: bearings examined (fixes of MIN_FIX_LINES or more lines with a known SD and a position)
    examined: int
    #: (column, label, clear wild lines of that label, its share of the examined bearings) where one label holds
    #: most of them, else None
    carrier: tuple | None = None

    @property
    def floor(self):
        """The prior's density as odds per radian: share / (1 - share) / (2 pi)."""
        return self.share / (1.0 - self.share) / (2.0 * np.pi)

    @property
    def raise_by(self) -> np.ndarray:
        """Per bin, the factor (at least 1) by which the sheet raises the prior's density."""
        with np.errstate(divide="ignore", invalid="ignore"):
            f = self.density / self.floor
            return np.where((self.counts >= MIN_BIN) & (f >= MIN_RAISE), f, 1.0)

    @property
    def raises(self) -> bool:
        return bool(self.counts.sum() >= MIN_WILD and (self.raise_by > 1.0).any())

    def log_raise(self, miss_rad):
        """log of the factor at each miss [rad] (0 where the sheet says nothing more than the prior)."""
        b = np.clip(np.searchsorted(EDGES_DEG, np.degrees(np.abs(miss_rad)), side="right") - 1, 0,
                    len(EDGES_DEG) - 2)
        return np.log(self.raise_by)[b]

    def note(self) -> str:
        """The sheet's note: what was learnt, what it changed, and what it cannot see."""
        f = self.raise_by
        up = np.flatnonzero(f > 1.0)
        lo, hi = EDGES_DEG[up.min()], EDGES_DEG[up.max() + 1]
        n = int(self.counts.sum())
        text = (f"wild lines: in {n} of the fixes of {MIN_FIX_LINES} or more bearings with a known SD (their "
                f"{self.examined} bearings), one bearing misses by {CLEAR_SDS:g} SDs or more while the others agree; "
                f"at misses of {lo:g}-{hi:g}° such lines are up to {f.max():.1f} times as common as the prior "
                f"(--wild-share {self.share:g}, spread evenly over every direction), so each weighed fix's wild risk "
                f"was weighed at this sheet's own rate (--wild-rate prior keeps the prior); wild lines less than "
                f"{CLEAR_SDS:g} SDs off cannot be told from good ones and are not counted, so the rate may still be "
                f"low where such lines are common")
        if self.carrier is not None:
            col, label, k, share = self.carrier
            text += (f"; {k} of the {n} are {col} {label}'s ({100 * share:.0f} % of the bearings): its bearings may "
                     f"read off or be less precise than their SD says; calibrate it")
        return text


def learn(fixes, share) -> WildLines | None:
    """The clear wild lines of a located sheet (:class:`dfkit.locate.Fixes`), against the prior ``share``; None when
    the sheet has too few bearings of fixes of MIN_FIX_LINES or more lines with a known SD to say anything.

    A bearing k's miss is its deleted residual, r_k / (1 - h_k) in the fix's linear model (h_k its leverage, with
    the fit's weights: a line the fit dropped has h_k = 0 and its residual is its miss), and it is clear when its
    studentised form r_k / (SD_k sqrt(1 - h_k)) reaches CLEAR_SDS (R. D. Cook & S. Weisberg, *Residuals and
    Influence in Regression*, 1982, ch. 2 [from memory]): a wild line that carries its fix (h_k near 1) pulls the
    fix onto itself, and its residual at the fix says little.
    """
    t, b = fixes.table, fixes.bearings
    if share <= 0 or not len(b) or not len(t) or fixes.azimuth_deg is None:
        return None
    g = b["fix_id"].to_numpy(np.int64)
    m = len(t)
    known = t["sd_source"].isin(KNOWN_SD_SOURCES).to_numpy()
    many = t["n_bearings"].to_numpy(np.int64) >= MIN_FIX_LINES
    sd = b["sd"].to_numpy(float)
    if "rounding_sd_deg" in b:
        sd = np.hypot(sd, np.nan_to_num(b["rounding_sd_deg"].to_numpy(float)))
    r = b["residual_deg"].to_numpy(float)
    d = b["range_m"].to_numpy(float)
    w = b["weight"].to_numpy(float)
    fine = np.isfinite(r) & np.isfinite(sd) & (sd > 0) & np.isfinite(d) & (d > 0) & np.isfinite(w)
    take = (known & many & np.isfinite(t["lat"].to_numpy(float)))[g] & fine
    if take.sum() < MIN_LINES:
        return None
    # leverages at the fix (the gradient of a bearing is 1 / d across its line of sight): with the fit's weights for
    # each miss (a dropped line's is 0: its residual is its miss), and with every line at full weight for the cut
    # (what a wild line there would show against the spread of good ones: the deleted residual's SD is
    # SD_k / sqrt(1 - h_k))
    # (on the examined bearings only, each array freed once used: this runs while the sheet's tables are held)
    rows = np.flatnonzero(take)
    del take, fine
    gt, w, sd = g[rows], w[rows], sd[rows]
    az = np.radians(np.asarray(fixes.azimuth_deg, float)[rows])
    dt = d[rows]
    gx, gy = -np.cos(az) / dt, np.sin(az) / dt
    del az, dt
    v = 1.0 / np.radians(sd) ** 2
    h_full = _leverages(gt, m, v, gx, gy)
    h = _leverages(gt, m, v * w, gx, gy)
    del gx, gy
    fine = np.isfinite(h) & (h < 1.0 - 1e-9) & np.isfinite(h_full) & (h_full < 1.0 - 1e-9)
    if not fine.all():
        rows, gt, w, sd, v, h, h_full = (a[fine] for a in (rows, gt, w, sd, v, h, h_full))
    r = np.abs(r[rows])
    h = np.clip(h, 0.0, None)
    miss = r / (1.0 - h)
    cut = CLEAR_SDS * sd / np.sqrt(1.0 - np.clip(h_full, 0.0, None))     # the smallest clear miss
    del h_full, sd
    clear = _one_a_fix(gt, m, miss / cut, w, v, np.radians(r), h, miss >= cut)
    lo, hi = EDGES_DEG[:-1], EDGES_DEG[1:]
    counts = np.histogram(np.fmin(miss[clear], 180.0), EDGES_DEG)[0].astype(float)
    if counts.sum() < MIN_WILD:         # nothing to learn: the prior stands
        return WildLines(float(share), counts, np.zeros(len(lo)), np.zeros(len(lo)), len(rows))
    # each bearing's share of each bin beyond its own cut, where it could have shown a clear miss (bin by bin: a
    # (bearings, bins) array would be the largest of the run)
    exposed = np.array([np.clip((b - np.fmax(a, cut)) / (b - a), 0.0, 1.0).sum() for a, b in zip(lo, hi)])
    width = 2.0 * np.radians(hi - lo)                        # either side
    with np.errstate(divide="ignore", invalid="ignore"):
        # a bin's count less one Poisson SD: a bin raises the prior only by what it shows beyond its own noise
        density = np.where(exposed > 0, np.fmax(counts - np.sqrt(counts), 0.0) / (exposed * width), 0.0)
    wild = float(np.sum(density * width))                   # the share of bearings wild at the learnt misses
    density = density / max(1.0 - min(wild, 0.5), 0.5)      # as odds against a good bearing
    return WildLines(float(share), counts, exposed, density, len(rows), _carrier(b, rows[clear], rows))


def _carrier(b, clear_rows, rows):
    """(column, label, clear lines, share of the bearings) of a group label holding most of the clear wild lines
    ``clear_rows`` (rows of ``b``) out of all the examined ``rows``, or None."""
    from dfkit.locate.offsets import group_columns

    for col in group_columns(b):
        labels = b[col].astype(str).to_numpy()
        names, k = np.unique(labels[clear_rows], return_counts=True)
        if not len(k):
            continue
        top = int(np.argmax(k))
        share = float(np.mean(labels[rows] == names[top]))
        if names[top].strip() and k[top] >= LABEL_SHARE * len(clear_rows) and k[top] >= 2.0 * share * len(clear_rows):
            return col, names[top], int(k[top]), share
    return None


def _one_a_fix(g, m, z, w, v, r_rad, h, far):
    """Per bearing, whether it is a candidate for a clear wild line: a line the fit dropped, or of those it kept the
    one with the largest ``z`` (miss over its cut); ``far`` (its miss at least its cut), and the rest of the fix
    consistent without it (chi-square p at least INCONSISTENT_P on the
    bearings the fit used, less that one). A fit that keeps a wild line (Lenth's, least squares) pulls the good
    ones off with it: only the line that explains the misfit counts, once. S without bearing k is the fit's S less
    v_k w_k r_k^2 / (1 - h_k) (the deletion formula of a linear model; Cook & Weisberg, 1982, ch. 2 [from memory])."""
    kept = w > 0
    # a far line has z >= 1 and the others z < 1: the largest z of a fix, if far, is found among the far ones
    cand = np.flatnonzero(far & kept)
    order = cand[np.lexsort((z[cand], g[cand]))]
    top = np.zeros(len(g), bool)
    if len(order):
        top[order[np.r_[g[order][1:] != g[order][:-1], True]]] = True
    vw = v * np.where(kept, w, 0.0)
    s_fix = np.bincount(g, vw * r_rad * r_rad, m)
    used = np.bincount(g, kept.astype(float), m)
    # a line the fit dropped (a robust fit: Huber's, Andrews') counts as well, each of them, when the lines the fit
    # kept agree; of the kept ones, the one that explains the misfit; only those ``far`` enough are tested (few)
    out = (top | ~kept) & far
    c = np.flatnonzero(out)
    k = kept[c]
    s_rest = np.where(k, np.fmax(s_fix[g[c]] - vw[c] * r_rad[c] ** 2 / (1.0 - h[c]), 0.0), s_fix[g[c]])
    dof = used[g[c]] - k - 2
    with np.errstate(invalid="ignore"):
        out[c] = (dof >= 1) & (chi2_sf(s_rest, np.maximum(dof, 1).astype(np.int64)) >= INCONSISTENT_P)
    return out


def _leverages(g, m, v, gx, gy):
    """Each bearing's leverage h = v g^T J^-1 g in its fix's linear model, J = sum v g g^T over the fix."""
    j11, j12, j22 = (np.bincount(g, v * a, m) for a in (gx * gx, gx * gy, gy * gy))
    det = j11 * j22 - j12 * j12
    with np.errstate(divide="ignore", invalid="ignore"):
        return v * (j22[g] * gx * gx - 2.0 * j12[g] * gx * gy + j11[g] * gy * gy) / det[g]
