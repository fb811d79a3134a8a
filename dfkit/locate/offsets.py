"""Does one observer, team, antenna or receiver read systematically off the others?

A compass 10° off, or an antenna whose mounting is turned, shifts every bearing of
that group by the same angle. Within a fix the fit absorbs part of such an offset by
moving the answer, so the plain mean residual of the group understates it and its
plain standard error does not hold. This module tests it in the linearised model of
the fix with one more parameter, the group's offset delta:

    r_j / s_j = x_j . b + delta * u_j + e_j,   e_j ~ N(0, 1)

where r_j is bearing j's residual at the fix [rad], s_j its SD [rad], x_j the
whitened gradient of its bearing with respect to the fix's position (east, north;
(-cos a_j, sin a_j) / (d_j s_j) for a station at azimuth a_j and distance d_j from
the fix) and u_j = 1/s_j for the group's bearings, 0 for the others. With
M = sum x x', q = sum x r/s, the score of delta and its information are

    U = sum_G r/s^2 - c' M^-1 q,    V = sum_G 1/s^2 - c' M^-1 c,    c = sum_G x/s,

so the least-squares offset is U/V with standard error 1/sqrt(V) (the classical
test of one added regressor: the part of the group indicator the position cannot
absorb; e.g. Weisberg, *Applied Linear Regression*, 3rd ed., Wiley 2005, sect. 3.4
and 9.1 [from memory]). With a known SD, z = U/sqrt(V) is standard normal under no
offset; with the SD estimated from the fix, t = z/s with s^2 the residual variance
left once the offset is fitted, on n - 3 degrees of freedom. A fix tests each group
with at least :data:`MIN_GROUP` of its bearings and at least two other bearings, at
level :data:`OFFSET_P` divided by the number of groups it tests (Bonferroni).

Across a sheet the same U and V add up over the fixes for each group label
(:func:`sheet_offsets`): the pooled offset sum U / sum V with standard error
1/sqrt(sum V), tested at :data:`SHEET_OFFSET_P` divided by the number of labels.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Columns whose values name who or what took a bearing (their lower-cased names, as the sheet writes them).
GROUP_COLUMNS = ("observer", "team", "antenna", "receiver")
#: Fewest bearings of one group in a fix for the fix's own test (one bearing alone is a wild-line question).
MIN_GROUP = 2
#: Per-fix level of the group test, shared among the groups a fix tests (Bonferroni). The same conventional level
#: as the fix's chi-square test (dfkit.policy.INCONSISTENT_P); false flags measured in DEVELOPERS.md.
OFFSET_P = 0.01
#: Sheet-wide level, shared among every label tested: a sheet-wide warning should be rare on clean sheets
#: (our choice).
SHEET_OFFSET_P = 0.001
#: A group whose offset the fix's position absorbs almost entirely (V below this share of sum_G 1/s^2) is not
#: tested: the test would be all noise (a numerical guard, our choice).
MIN_FREE_SHARE = 0.05
#: An ok fix that uses bearings of a group the sheet shows to be off is marked when removing that offset would move
#: it by at least this many standard errors (Mahalanobis distance): a 95 % region whose centre is off by 0.5 holds
#: the point about 93.7 % of the time (non-central chi-square, 2 dof), by 1.0 about 88 %.
SHIFT_SE = 0.5


@dataclass
class GroupStats:
    """Per (fix, group) pair: ``fix``, ``column`` (index into the columns), ``label``, ``n`` bearings of the
    group used, ``U`` and ``V`` (module docstring, whitened), ``shift`` (c' M^-1 c, the position's share),
    ``n_fix`` bearings used in the fix, ``rss1`` the fix's whitened residual sum of squares with the offset
    fitted, and ``lines`` (the group's input lines)."""

    fix: np.ndarray
    column: np.ndarray
    label: np.ndarray
    n: np.ndarray
    U: np.ndarray
    V: np.ndarray
    B: np.ndarray
    shift: np.ndarray
    n_fix: np.ndarray
    rss1: np.ndarray
    lines: list
    columns: list
    testable: np.ndarray


def group_columns(table) -> list[str]:
    """The columns of a bearings table that name a group (:data:`GROUP_COLUMNS`, any case), with a value."""
    out = []
    for c in table.columns:
        if str(c).strip().lower() in GROUP_COLUMNS:
            # each distinct value once (a column of 400,000 cells holds a few names, or only empty cells)
            v = table[c].drop_duplicates().astype(str).str.strip()
            if (v != "").any() and (v.str.lower() != "nan").any():
                out.append(c)
    return out


def group_stats(table, g, m, residual_deg, az_deg, range_m, sigma_deg, use, *, min_group=1) -> GroupStats | None:
    """U, V ... of every (fix, group label) pair with at least ``min_group`` used bearings of the group (arrays over the bearings of ``table``; ``sigma_deg`` each bearing's
    SD [°], ``use`` the bearings that count)."""
    cols = group_columns(table)
    if not cols or not len(g):
        return None
    use = use & np.isfinite(residual_deg) & np.isfinite(sigma_deg) & (sigma_deg > 0) & (range_m > 0)
    s = np.radians(np.where(use, sigma_deg, 1.0))
    r = np.radians(np.where(use, residual_deg, 0.0)) / s           # whitened residual
    a = np.radians(np.where(use, az_deg, 0.0))
    d = np.where(use, range_m, 1.0)
    xe, xn = np.where(use, -np.cos(a) / (d * s), 0.0), np.where(use, np.sin(a) / (d * s), 0.0)
    w = 1.0 / s
    u = use.astype(float)
    M = np.stack([np.bincount(g, u * xe * xe, m), np.bincount(g, u * xe * xn, m), np.bincount(g, u * xn * xn, m)])
    q = np.stack([np.bincount(g, u * xe * r, m), np.bincount(g, u * xn * r, m)])
    rss = np.bincount(g, u * r * r, m)
    n_fix = np.bincount(g, u, m).astype(int)
    det = M[0] * M[2] - M[1] ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        Mi = np.stack([M[2] / det, -M[1] / det, M[0] / det])
    lines = table["line"].to_numpy()
    if not len(cols):
        return None
    fixes, columns, labels, ns, Us, Vs, Bs, shifts, nfs, rss1s, line_lists, tests = ([] for _ in range(12))
    for k, col in enumerate(cols):
        val = table[col].astype(str).str.strip().to_numpy(dtype=object)
        named = use & (val != "") & (val != "nan")
        if not named.any():
            continue
        codes, names = _codes(val, named)
        K = len(names)
        key = np.where(named, g * K + codes, -1)
        sel = np.flatnonzero(named)
        pair, inv = np.unique(key[sel], return_inverse=True)
        P = len(pair)
        nG = np.bincount(inv, minlength=P).astype(int)
        A = np.bincount(inv, r[sel] * w[sel], P)
        B = np.bincount(inv, w[sel] ** 2, P)
        ce = np.bincount(inv, xe[sel] * w[sel], P)
        cn = np.bincount(inv, xn[sel] * w[sel], P)
        f = pair // K
        with np.errstate(invalid="ignore", divide="ignore"):
            mq_e = Mi[0][f] * q[0][f] + Mi[1][f] * q[1][f]
            mq_n = Mi[1][f] * q[0][f] + Mi[2][f] * q[1][f]
            U = A - (ce * mq_e + cn * mq_n)
            cMc = ce * (Mi[0][f] * ce + Mi[1][f] * cn) + cn * (Mi[1][f] * ce + Mi[2][f] * cn)
            V = B - cMc
            rss1 = rss[f] - (q[0][f] * mq_e + q[1][f] * mq_n) - U * U / V
        keep = (nG >= min_group) & (det[f] > 0) & np.isfinite(cMc)
        testable = (n_fix[f] - nG >= 2) & np.isfinite(V) & (V > MIN_FREE_SHARE * B)
        idx = np.flatnonzero(keep)
        tests.append(testable[idx])
        order = np.argsort(inv, kind="stable")
        starts = np.concatenate(([0], np.cumsum(nG)))
        for p in idx:
            line_lists.append(lines[sel[order[starts[p]:starts[p + 1]]]].tolist())
        fixes.append(f[idx])
        columns.append(np.full(len(idx), k))
        labels.append(names[pair[idx] % K])
        ns.append(nG[idx])
        Us.append(U[idx])
        Vs.append(V[idx])
        Bs.append(B[idx])
        shifts.append(cMc[idx])
        nfs.append(n_fix[f[idx]])
        rss1s.append(rss1[idx])
    if not fixes:
        return None
    cat = np.concatenate
    st = GroupStats(fix=cat(fixes), column=cat(columns), label=cat(labels), n=cat(ns), U=cat(Us), V=cat(Vs), B=cat(Bs),
                    shift=cat(shifts), n_fix=cat(nfs), rss1=cat(rss1s), lines=line_lists,
                    columns=cols, testable=cat(tests))
    return st


def _codes(val, named):
    names, codes = np.unique(np.where(named, val, ""), return_inverse=True)
    return codes, names


def _side(deg):
    return "clockwise" if deg >= 0 else "anticlockwise"


def fix_offsets(table, g, m, sol) -> dict[int, str]:
    """The per-fix test (module docstring): {fix index: reason text} for every fix with a group off.

    Arrays from :func:`dfkit.locate.locate`: the bearings ``table``, their fix ``g``, the number of fixes ``m``
    and the solver's :class:`~dfkit.estimators.Solution`. Only bearings the fit uses and that point towards the
    fix count, and only fixes at a verified optimum are tested.
    """
    if not len(g):
        return {}
    sd_b = table["sd"].to_numpy(float)
    sigma = np.where(sol.sd_known[g], sd_b, sol.sd_deg[g])
    with np.errstate(invalid="ignore"):
        use = (sol.weight > 0) & sol.converged[g] & (np.cos(np.radians(sol.residual_deg)) > 0)
    st = group_stats(table, g, m, sol.residual_deg, sol.azimuth_from_fix_deg, sol.range_m, sigma, use,
                     min_group=MIN_GROUP)
    if st is None or not len(st.fix):
        return {}
    from scipy import stats     # only for sheets that name observers (dfkit fix on a plain sheet loads no scipy)

    known = sol.sd_known[st.fix]
    with np.errstate(invalid="ignore", divide="ignore"):
        z = st.U / np.sqrt(st.V)
        dof = st.n_fix - 3
        floor_w = np.where(known, 0.0, (sol.sd_floor_deg[st.fix] if sol.sd_floor_deg is not None else 0.0)
                           / sol.sd_deg[st.fix])
        s = np.where(known, 1.0, np.fmax(np.sqrt(np.maximum(st.rss1, 0.0) / np.maximum(dof, 1)), floor_w))
        p = np.where(known, 2 * stats.norm.sf(np.abs(z)), 2 * stats.t.sf(np.abs(z / s), np.maximum(dof, 1)))
    p = np.where((known | (dof >= 1)) & st.testable, p, np.nan)
    tested = np.bincount(st.fix[np.isfinite(p)], minlength=m)
    with np.errstate(invalid="ignore"):
        off = p * tested[st.fix] < OFFSET_P
    out: dict[int, str] = {}
    for k in np.flatnonzero(off):
        i = int(st.fix[k])
        deg = float(np.degrees(st.U[k] / st.V[k]))
        se = float(np.degrees(s[k] / np.sqrt(st.V[k])))
        n_t = int(tested[i])
        lines = st.lines[k]
        where = "line" + ("s " if len(lines) > 1 else " ") + ", ".join(str(x) for x in lines)
        text = (f"{st.columns[st.column[k]]} {st.label[k]} reads {abs(deg):.1f}° (± {se:.1f}) {_side(deg)} of the "
                f"other bearings of this fix ({where}; p = {p[k]:.1g}, {n_t} group{'s' if n_t != 1 else ''} tested): "
                "a compass or antenna offset? calibrate it (dfkit calibrate) or check the declination")
        out[i] = (out[i] + "; " + text) if i in out else text
    return out


@dataclass
class SheetOffset:
    """A group label the sheet shows to read off: ``column``, ``label``, pooled ``offset_deg`` (clockwise
    positive) and its ``se_deg``, ``p`` (two-sided, before the correction for ``n_tested`` labels), ``n_fixes``
    and ``n_bearings`` pooled, and the fixes ``marked`` (index: shift in standard errors) whose position the
    offset moves by at least :data:`SHIFT_SE`."""

    column: str
    label: str
    offset_deg: float
    se_deg: float
    p: float
    n_tested: int
    n_fixes: int
    n_bearings: int
    marked: dict

    def text(self) -> str:
        return (f"{self.column} {self.label} reads on average {abs(self.offset_deg):.1f}° (± {self.se_deg:.1f}) "
                f"{_side(self.offset_deg)} of the fixes ({self.n_bearings} bearings in {self.n_fixes} fixes; "
                f"p = {self.p:.1g}, {self.n_tested} label{'s' if self.n_tested != 1 else ''} tested): a compass or "
                f"antenna offset? calibrate it (dfkit calibrate) or check the declination")


def sheet_offsets(table, bearings, with_position) -> list[SheetOffset]:
    """The sheet-wide test (module docstring) on a located sheet: ``table`` and ``bearings`` of
    :class:`~dfkit.locate.Fixes`, ``with_position`` per fix. Bearings off by more than
    :data:`dfkit.policy.WILD_SD` SDs are left out of the pooling (they are named in their fixes)."""
    from dfkit import geodesy
    from dfkit.policy import WILD_SD

    b = bearings
    m = len(table)
    if not len(b) or not m or not group_columns(b):      # no observer, team ... named: nothing to pool
        return []
    g = b["fix_id"].to_numpy(dtype=np.int64)
    flat, flon = table["lat"].to_numpy(float), table["lon"].to_numpy(float)
    az, _, _ = geodesy.inverse(flat[g], flon[g], b["lat"].to_numpy(float), b["lon"].to_numpy(float))
    known = table["sd_source"].isin(["given", "calibration", "given+calibration"]).to_numpy()
    # an estimated SD is one value for the whole sheet (the fixes' median): weighting each fix by its own estimate
    # would down-weight the fixes where the offset shows most (it inflates their estimate) and bias the pooled offset
    est = table["sd_deg"].to_numpy(float)[~known & with_position]
    est_sd = float(np.nanmedian(est)) if np.isfinite(est).any() else np.nan
    sigma = np.where(known[g], b["sd"].to_numpy(float), est_sd)
    r = b["residual_deg"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        use = (with_position[g] & (b["weight"].to_numpy(float) > 0) & (np.abs(r) <= WILD_SD * sigma)
               & (np.abs(r) < 90.0))
    st = group_stats(b, g, m, r, az, b["range_m"].to_numpy(float), sigma, use, min_group=1)
    if st is None or not len(st.fix):
        return []
    from scipy import stats

    key = st.column * (10 ** 9) + np.unique(st.label, return_inverse=True)[1]
    labels, inv = np.unique(key, return_inverse=True)
    L = len(labels)
    tw = st.testable.astype(float)
    Us, Vs = np.bincount(inv, np.where(st.testable, st.U, 0.0), L), np.bincount(inv, np.where(st.testable, st.V, 0.0), L)
    nf = np.bincount(inv, tw, L).astype(int)
    nb = np.bincount(inv, tw * st.n, L).astype(int)
    ok = (nf >= 2) & (Vs > 0)
    n_tested = int(ok.sum())
    out = []
    with np.errstate(invalid="ignore", divide="ignore"):
        z = Us / np.sqrt(Vs)
        p = 2 * stats.norm.sf(np.abs(z))
    found = np.flatnonzero(ok & (p * max(n_tested, 1) < SHEET_OFFSET_P))
    if not len(found):
        return out
    # the shift each flagged label causes in every fix using it, its wild bearings included (they move it too)
    with np.errstate(invalid="ignore"):
        every = with_position[g] & (b["weight"].to_numpy(float) > 0) & (np.abs(r) < 90.0)
    st2 = group_stats(b, g, m, r, az, b["range_m"].to_numpy(float), sigma, every, min_group=1)
    for k in found:
        first = int(np.flatnonzero(inv == k)[0])
        col, label = st.column[first], st.label[first]
        delta = Us[k] / Vs[k]
        pairs = np.flatnonzero((st2.column == col) & (st2.label == label))
        shift = np.abs(delta) * np.sqrt(np.maximum(st2.shift[pairs], 0.0))
        marked = {int(st2.fix[j]): float(x) for j, x in zip(pairs, shift) if x >= SHIFT_SE}
        out.append(SheetOffset(column=str(st.columns[col]), label=str(label),
                               offset_deg=float(np.degrees(delta)), se_deg=float(np.degrees(1 / np.sqrt(Vs[k]))),
                               p=float(p[k]), n_tested=n_tested, n_fixes=int(nf[k]), n_bearings=int(nb[k]),
                               marked=marked))
    return out
