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

Joint. Tested one label at a time, an offset of one observer leaks into the others:
with three bearings per fix, one per observer, the residual of a fix has one dimension,
close to "every bearing turned alike", and each label tested alone takes the whole
turn. So the offsets of all L labels of a column are fitted together: with z_l the
whitened indicator of label l, the L x L information of a fix and its score are

    V_ll' = [l = l'] sum_l w^2 - c_l' M^-1 c_l',    U_l = sum_l r w - c_l' M^-1 q,

(w = 1/s), and over the sheet I = sum V, S = sum U; the offsets are I^+ S with
covariance I^+ (pseudo-inverse: a direction the fixes do not inform gets no estimate).
:func:`explain` then names the fewest labels whose own offsets, the rest sharing one
offset d0, leave no significant difference (a nested chi-square test of what is left,
the classical test of a linear restriction, e.g. Seber and Lee, *Linear Regression
Analysis*, 2nd ed., Wiley 2003, sect. 4.3 [from memory]). A named label is said
against the rest (its contrast theta_l - d0); d0 itself, when significant, is a turn
shared by the rest (or by every bearing: a declination or north mistake). When the
labels cannot be told apart (the standard error of one label against the others at
least half the shared turn), the warning says so instead of naming anyone.

Across a sheet (:func:`sheet_offsets`) the whole column is tested first (chi-square on
the rank of I) at :data:`SHEET_OFFSET_P` divided by the number of columns, and the naming
runs at the same level. Within a fix (:func:`fix_offsets`) labels with at least
:data:`MIN_GROUP` bearings get an offset; when they hold every bearing of the fix, a
turn shared by all of them is the fix's own misfit (its chi-square test), so only their
differences are tested (L - 1 dof); otherwise the other bearings are the reference. The
level is :data:`OFFSET_P` divided by the columns the fix tests; with the SD estimated
the test is an F test on the residual variance left once every offset is fitted.
An ``ok`` fix is marked when removing the fitted offsets moves it by at least
:data:`SHIFT_SE` standard errors: the shift M^-1 sum_l c_l delta_l, measured in M.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit.locate.fixes import KNOWN_SD_SOURCES

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
#: it by at least this many standard errors (Mahalanobis distance): a 95 % region whose centre is off by 0.5, 0.6
#: and 1.0 holds the point 93.1, 92.3 and 86.7 % of the time (non-central chi-square, 2 dof: scipy.stats.ncx2).
#: Chosen by measurement (DEVELOPERS.md, offsets): at 0.5 a season whose six observers each had a real 1-2° bias
#: had 11 % of its good fixes marked (their shifts sat just above 0.5), holding the truth as often as the unmarked
#: (93.8 against 94.5 %), and a calibrated sheet 6 %; at 0.6 none. At 0.75 a sheet with one observer 5° off and one
#: bearing per observer per fix kept 98 % of its fixes ok, holding the truth 90.0 % (0.6: 48 %, holding 91.2 %).
SHIFT_SE = 0.6
#: A group "reading off" by more than this within one fix [°] is not a compass or antenna offset but a wild or
#: reflected bearing among its few bearings (a trial found claims of 2,005° and 49,696°): no offset is said then.
#: Our choice: compass and mounting errors are a few degrees; 30° is far beyond them.
MAX_FIX_OFFSET_DEG = 30.0
#: The column name of the one group a sheet without group columns is tested as (never a sheet's own name).
WHOLE_SHEET = "\x00whole sheet"
#: Fewest fixes a column must span for the sheet-wide test (one fix alone is tested on its own).
MIN_SHEET_FIXES = 2


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
    ce: np.ndarray = None
    cn: np.ndarray = None
    Mi: np.ndarray = None
    rss0: np.ndarray = None
    n_used: np.ndarray = None


def group_columns(table) -> list[str]:
    """The columns of a bearings table that name a group (:data:`GROUP_COLUMNS`, any case), with a value."""
    out = []
    for c in table.columns:
        if str(c).strip().lower() in GROUP_COLUMNS:
            if (table[c].to_numpy(dtype=object) == "").all():
                continue         # the reader's empty column (most sheets name no observer or antenna)
            # each distinct value once (a column of 400,000 cells holds a few names, or only empty cells)
            v = table[c].drop_duplicates().astype(str).str.strip()
            if (v != "").any() and (v.str.lower() != "nan").any():
                out.append(c)
    return out


def whitened_gradients(az_deg, range_m, sigma_deg, use):
    """Each bearing's SD s [rad] and the whitened gradient (xe, xn) of its direction with respect to the fix's
    position (east, north) [1/m in SDs]: (-cos a, sin a) / (d s) for a station at azimuth a and distance d from
    the fix (module docstring); s = 1 and zeros where ``use`` is False."""
    s = np.radians(np.where(use, sigma_deg, 1.0))
    a = np.radians(np.where(use, az_deg, 0.0))
    d = np.where(use, range_m, 1.0)
    return s, np.where(use, -np.cos(a) / (d * s), 0.0), np.where(use, np.sin(a) / (d * s), 0.0)


def _gradients(az_deg, range_m, sigma_deg):
    """:func:`whitened_gradients` of bearings that all count: the same arithmetic without the masks, and the
    product d s formed once."""
    s = np.radians(sigma_deg)
    a = np.radians(az_deg)
    ds = range_m * s
    return s, -np.cos(a) / ds, np.sin(a) / ds


#: Bearings whose sums group_stats works out at a time, when they come fix by fix (a run of whole fixes about this
#: long; its working arrays are this long, not the sheet's).
CHUNK_BEARINGS = 1 << 17


def _fix_runs(g, m, size=None):
    """(first, end) bearing index and (first, end) fix of runs of whole fixes about ``size`` bearings long, when
    the fix of each bearing ``g`` (of ``m`` fixes) never decreases (bearings fix by fix); one run of every bearing
    and every fix otherwise."""
    n = len(g)
    size = CHUNK_BEARINGS if size is None else size
    if n <= size or not bool(np.all(g[1:] >= g[:-1])):
        return [(0, n, 0, m)]
    ends = np.unique(np.searchsorted(g, g[np.arange(size, n, size)], side="left"))
    bounds = np.concatenate(([0], ends[(ends > 0) & (ends < n)], [n])).tolist()
    return [(b0, b1, int(g[b0]), int(g[b1 - 1]) + 1) for b0, b1 in zip(bounds[:-1], bounds[1:])]


def _joined(parts):
    """The chunks' arrays as one (the one array itself when there is one chunk); None when they are None."""
    if parts[0] is None:
        return None
    return parts[0] if len(parts) == 1 else np.concatenate(parts)


def group_stats(table, g, m, residual_deg, az_deg, range_m, sigma_deg, use, *, min_group=1,
                columns=None, with_lines=True) -> GroupStats | None:
    """U, V ... of every (fix, group label) pair with at least ``min_group`` used bearings of the group (arrays over
    the bearings of ``table``; ``sigma_deg`` each bearing's SD [°], ``use`` the bearings that count; ``columns`` the
    group columns, by default :func:`group_columns`)."""
    cols = group_columns(table) if columns is None else list(columns)
    if not cols or not len(g):
        return None
    use = use & np.isfinite(residual_deg) & np.isfinite(sigma_deg) & (sigma_deg > 0) & (range_m > 0)
    # Each column's labels (text of every bearing, read once)
    named_codes = []
    for col in cols:
        if col == WHOLE_SHEET:       # one label for every bearing: no text to read
            named_codes.append((None, None, np.array(["all"], dtype=object)))
        else:
            val = _stripped_text(table[col])
            named = use & (val != "") & (val != "nan")
            codes, names = _codes(val, named)
            named_codes.append((named, codes, names))
            del val
    # The sums run over the bearings that count only (an unused bearing adds exact zeros to each), a run of whole
    # fixes at a time when the bearings come fix by fix (their working arrays stay a chunk long): a fix's sums
    # and its pairs' are then those of one pass over its bearings in the same order, so the same bits.
    M = np.zeros((3, m))
    q = np.zeros((2, m))
    rss = np.zeros(m)
    n_fix = np.zeros(m, int)
    parts = [[] for _ in cols]       # per column and chunk: (pairs, bearings, inverse, nG, A, B, ce, cn)
    for b0, b1, f0, f1 in _fix_runs(g, m):
        iu = b0 + np.flatnonzero(use[b0:b1])
        gu = g[iu] - f0
        s, xe, xn = _gradients(az_deg[iu], range_m[iu], sigma_deg[iu])
        r = np.radians(residual_deg[iu]) / s           # whitened residual
        w = 1.0 / s
        del s
        n = f1 - f0
        M[0, f0:f1], M[1, f0:f1], M[2, f0:f1] = (np.bincount(gu, xe * xe, n), np.bincount(gu, xe * xn, n),
                                                 np.bincount(gu, xn * xn, n))
        q[0, f0:f1], q[1, f0:f1] = np.bincount(gu, xe * r, n), np.bincount(gu, xn * r, n)
        rss[f0:f1] = np.bincount(gu, r * r, n)
        n_fix[f0:f1] = np.bincount(gu, minlength=n)
        for k, (named, codes, names) in enumerate(named_codes):
            K = len(names)
            if named is None:
                loc = slice(None)                         # the bearings of the group, among those that count
                key = gu
            else:
                loc = np.flatnonzero(named[iu])
                key = gu[loc] * K + codes[iu[loc]]
            if not len(key):
                continue
            pair, inv = _unique(key, n * K)
            P = len(pair)
            parts[k].append((pair + f0 * K, iu[loc] if with_lines else None, inv if with_lines else None,
                             np.bincount(inv, minlength=P).astype(int), np.bincount(inv, r[loc] * w[loc], P),
                             np.bincount(inv, w[loc] ** 2, P), np.bincount(inv, xe[loc] * w[loc], P),
                             np.bincount(inv, xn[loc] * w[loc], P)))
        del iu, gu, xe, xn, r, w
    label_names = [names for _, _, names in named_codes]
    del named_codes
    det = M[0] * M[2] - M[1] ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        Mi = np.stack([M[2] / det, -M[1] / det, M[0] / det])
    lines = table["line"].to_numpy()
    fixes, columns, labels, ns, Us, Vs, Bs, shifts, nfs, rss1s, tests = ([] for _ in range(11))
    line_lists = _PairLines()
    ces, cns = [], []
    for k, col in enumerate(cols):
        if not parts[k]:
            continue
        names = label_names[k]
        K = len(names)
        pair, sel, inv, nG, A, B, ce, cn = (_joined([c[i] for c in parts[k]]) for i in range(8))
        if with_lines and len(parts[k]) > 1:       # each chunk's inverse counts its own pairs from 0
            first = np.cumsum([0] + [len(c[0]) for c in parts[k][:-1]])
            inv = np.concatenate([c[2] + o for c, o in zip(parts[k], first)])
        parts[k] = None
        P = len(pair)
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
        pick = (lambda a: a) if len(idx) == P else (lambda a: a[idx])       # a copy only when pairs are left out
        tests.append(pick(testable))
        if with_lines:       # the input lines of each pair, for the per-fix reasons (not for the sheet's pooling)
            line_lists.add(lines, sel, np.argsort(inv, kind="stable"), np.concatenate(([0], np.cumsum(nG))), idx)
        fixes.append(pick(f))
        columns.append(np.full(len(idx), k))
        labels.append(names[pick(pair) % K])
        ns.append(pick(nG))
        Us.append(pick(U))
        Vs.append(pick(V))
        Bs.append(pick(B))
        shifts.append(pick(cMc))
        ces.append(pick(ce))
        cns.append(pick(cn))
        nfs.append(n_fix[fixes[-1]])
        rss1s.append(pick(rss1))
        del A, mq_e, mq_n, inv, sel, keep, testable    # this column's working arrays, before the next one's
    if not fixes:
        return None

    def cat(parts):                     # one column (the usual case): its arrays as they are, not copied
        return parts[0] if len(parts) == 1 else np.concatenate(parts)
    with np.errstate(invalid="ignore"):
        rss0 = rss - (q[0] * (Mi[0] * q[0] + Mi[1] * q[1]) + q[1] * (Mi[1] * q[0] + Mi[2] * q[1]))
    st = GroupStats(fix=cat(fixes), column=cat(columns), label=cat(labels), n=cat(ns), U=cat(Us), V=cat(Vs), B=cat(Bs),
                    shift=cat(shifts), n_fix=cat(nfs), rss1=cat(rss1s), lines=line_lists,
                    columns=cols, testable=cat(tests), ce=cat(ces), cn=cat(cns), Mi=Mi,
                    rss0=rss0,
                    n_used=n_fix)
    return st


def _stripped_text(column):
    """``column.astype(str).str.strip()`` as an object array, the few distinct values stripped once each (a column of
    a sheet holds a handful of observer names over every bearing)."""
    import pandas as pd

    text = isinstance(column.dtype, pd.StringDtype) or (
        column.dtype == object and pd.api.types.infer_dtype(column, skipna=False) == "string")
    if text and len(column) > 64 and not column.isna().any():     # 1 and 1.0 would factorize as one value
        codes, uniq = pd.factorize(column)
        return pd.Series(np.asarray(uniq, dtype=object), dtype=object).astype(str).str.strip().to_numpy(
            dtype=object)[codes]
    return column.astype(str).str.strip().to_numpy(dtype=object)


class _PairLines:
    """The input lines of each (fix, label) pair of :class:`GroupStats`, as a read-only list whose items are made
    when asked for: the per-fix reasons name the lines of a few pairs, of the many a sheet holds."""

    def __init__(self):
        self._parts = []        # (first pair, lines, bearings, their order by pair, pair starts, pairs kept)
        self._n = 0

    def add(self, lines, sel, order, starts, idx):
        self._parts.append((self._n, lines, sel, order, starts, idx))
        self._n += len(idx)

    def __len__(self):
        return self._n

    def __getitem__(self, q):
        q = int(q)
        if q < 0:
            q += self._n
        if not 0 <= q < self._n:
            raise IndexError(q)
        for first, lines, sel, order, starts, idx in reversed(self._parts):
            if q >= first:
                p = idx[q - first]
                return lines[sel[order[starts[p]:starts[p + 1]]]].tolist()
        raise IndexError(q)

    def __iter__(self):
        return (self[q] for q in range(self._n))


def _codes(val, named):
    import pandas as pd     # factorize: a hash pass, where np.unique sorts the text of every bearing

    codes, names = pd.factorize(np.where(named, val, ""))
    return codes, np.asarray(names, dtype=object)


def _unique(key, size):
    """np.unique(key, return_inverse=True) of non-negative integers below ``size``: by a bincount when ``size`` is
    not much more than the keys (a pass over them, where np.unique sorts them)."""
    if size > 4 * len(key) + 1024:
        return np.unique(key, return_inverse=True)
    seen = np.bincount(key, minlength=size) > 0
    rank = np.cumsum(seen) - 1
    return np.flatnonzero(seen), rank[key]


def _sorted_codes(labels):
    """np.unique(labels, return_inverse=True) by a hash pass: the few distinct labels are sorted, not every one."""
    import pandas as pd

    codes, uniq = pd.factorize(labels)
    uniq = np.asarray(uniq, dtype=labels.dtype)
    order = np.argsort(uniq, kind="stable")
    rank = np.empty(len(uniq), np.int64)
    rank[order] = np.arange(len(uniq))
    return uniq[order], rank[codes]


def _n_fixes(fix):
    """How many distinct fixes (indices) ``fix`` holds."""
    return int(np.count_nonzero(np.bincount(fix))) if len(fix) else 0


def _side(deg):
    return "clockwise" if deg >= 0 else "anticlockwise"


# ---- joint estimation: every label of a column at once ----------------------------------------------------------

def _cross(group, fix, ce, cn, Mi):
    """Every ordered pair (a, b) of (fix, label) pairs in the same ``group`` (a == b included) with
    t = c_a' M^-1 c_b, the position's share of their joint information."""
    order = np.argsort(group, kind="stable")
    gs = group[order]
    n = len(gs)
    A, B, T = [], [], []
    for d in range(n):
        same = gs[: n - d] == gs[d:]
        if not same.any():
            break
        a, b = order[: n - d][same], order[d:][same]
        f = fix[a]
        t = ce[a] * (Mi[0][f] * ce[b] + Mi[1][f] * cn[b]) + cn[a] * (Mi[1][f] * ce[b] + Mi[2][f] * cn[b])
        A.append(a)
        B.append(b)
        T.append(t)
        if d:
            A.append(b)
            B.append(a)
            T.append(t)
    if not A:
        e = np.zeros(0, dtype=np.int64)
        return e, e, np.zeros(0)
    return np.concatenate(A), np.concatenate(B), np.concatenate(T)


def _pinv(I):
    """Pseudo-inverse and rank of a symmetric information matrix (eigenvalues below 1e-9 of the largest are
    directions the data do not inform)."""
    if I.shape == (1, 1):
        # LAPACK's answer for one dimension (eigenvalue the entry, eigenvector 1) without its call overhead
        a = float(I[0, 0])
        if a > max(a, 0.0) * 1e-9:
            return np.array([[1.0 / a]]), 1
        return np.zeros((1, 1)), 0
    w, v = np.linalg.eigh(I)
    tol = max(float(np.max(w, initial=0.0)), 0.0) * 1e-9
    keep = w > tol
    return (v[:, keep] / w[keep]) @ v[:, keep].T, int(keep.sum())


@dataclass
class Joint:
    """The offsets of L labels fitted jointly (module docstring, "Joint"): ``off`` the named labels (indices),
    ``rest`` the others, ``theta`` the fitted offset of each label [rad, whitened units] (the rest share one,
    ``d0``), ``cov`` their covariance, ``contrast``/``contrast_se``/``contrast_p`` of each named label against the
    rest, ``d0``/``d0_se``/``d0_p`` the rest's shared offset, ``lof_p`` whether the labels differ at all (p of the
    differences, before any is named), ``diff_se`` the largest standard error of one label against the others."""

    off: list
    rest: list
    theta: np.ndarray
    contrast: np.ndarray
    contrast_se: np.ndarray
    contrast_p: np.ndarray
    d0: float
    d0_se: float
    d0_p: float
    lof_p: float
    diff_se: float


def _model(S, I, rest, off):
    L = len(S)
    A = np.zeros((L, (1 if rest else 0) + len(off)))
    h = 0
    if rest:
        A[rest, 0] = 1.0
        h = 1
    for n, k in enumerate(off):
        A[k, h + n] = 1.0
    Gi, r = _pinv(A.T @ I @ A)
    th = Gi @ (A.T @ S)
    return th, Gi, float(S @ A @ th), r


def explain(S, I, p_of, level, pinv=None, spread=True) -> Joint:
    """Name the fewest labels whose offsets, with the rest sharing one offset, explain the score ``S`` given the
    information ``I`` (greedy: at each step the label whose own offset leaves the least unexplained, ties to the
    one that leaves the rest's shared offset nearest zero). ``p_of(chi2, dof)`` gives the p-value of a chi-square
    statistic (scaled by the SD where it is estimated); labels differ while that p of what is left is below
    ``level``. ``pinv``: :func:`_pinv` of ``I`` when the caller has it; ``spread=False``: no ``diff_se`` (NaN), for a
    caller that does not say it."""
    L = len(S)
    Ii, r_full = _pinv(I) if pinv is None else pinv
    chi_full = float(S @ Ii @ S)
    fits = {}      # each model fitted once: (what is left, its dof, |d0| / se) and the model's (th, Gi)

    def left(off):
        key = tuple(off)
        if key not in fits:
            rest = [k for k in range(L) if k not in off]
            th, Gi, chi, r = _model(S, I, rest, off)
            z0 = abs(th[0]) / np.sqrt(Gi[0, 0]) if rest and Gi[0, 0] > 0 else 0.0
            fits[key] = ((max(chi_full - chi, 0.0), r_full - r, z0), (th, Gi))
        return fits[key][0]

    off = []
    lof, dof, _ = left(off)
    lof_p = p_of(lof, dof) if dof > 0 else 1.0
    p_left = lof_p
    while dof > 0 and p_left < level and len(off) < L - 1:
        best = min((k for k in range(L) if k not in off),
                   key=lambda k: (round(left(off + [k])[0], 9), left(off + [k])[2]))
        off.append(best)
        lof, dof, _ = left(off)
        p_left = p_of(lof, dof) if dof > 0 else 1.0
    rest = [k for k in range(L) if k not in off]
    left(off)
    th, Gi = fits[tuple(off)][1]
    theta = np.zeros(L)
    h = 1 if rest else 0
    if rest:
        theta[rest] = th[0]
    theta[off] = th[h:]
    d0 = float(th[0]) if rest else 0.0
    v0 = float(Gi[0, 0]) if rest else 0.0
    con = th[h:] - d0
    var = np.array([Gi[h + i, h + i] + v0 - 2 * (Gi[0, h + i] if rest else 0.0) for i in range(len(off))])
    se = np.sqrt(np.maximum(var, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        cp = np.array([p_of(c * c / v, 1) if v > 0 else 1.0 for c, v in zip(con, var)])
        d0_p = p_of(d0 * d0 / v0, 1) if v0 > 0 else 1.0
    # how well the data tell one label from the others: the SE of each label against the mean of the rest
    worst = 0.0 if spread else np.nan
    if L > 1 and spread:
        for k in range(L):
            a = np.full(L, -1.0 / (L - 1))
            a[k] = 1.0
            vk = float(a @ Ii @ a)
            # np.allclose(I @ (Ii @ a), a, atol=...) without its per-call overhead (same rule: rtol 1e-5, NaN fails)
            in_span = bool(np.all(np.abs(I @ (Ii @ a) - a) <= 1e-6 * max(1.0, np.abs(a).max()) + 1e-5 * np.abs(a)))
            worst = max(worst, np.sqrt(vk) if in_span and vk > 0 else np.inf)
    return Joint(off=off, rest=rest, theta=theta, contrast=con, contrast_se=se, contrast_p=cp, d0=d0,
                 d0_se=float(np.sqrt(v0)) if rest else np.nan, d0_p=float(d0_p), lof_p=float(lof_p),
                 diff_se=float(worst))


def _names(col, labels, most=4):
    labels = [str(x) for x in labels]
    word = col + ("s" if len(labels) > 1 else "")
    if len(labels) > most:
        return f"{word} {', '.join(labels[:most - 1])} and {len(labels) - most + 1} others"
    if len(labels) > 1:
        return f"{word} {', '.join(labels[:-1])} and {labels[-1]}"
    return f"{word} {labels[0]}"


def _blocks(st, pairs, per_fix):
    """Score and information of the labels of each block (a column over the sheet, or a column within one fix):
    a list of (block key, label indices into st, S, I)."""
    col = st.column[pairs]
    if per_fix:
        return _fix_blocks(st, pairs)
    key = col
    blocks = []
    for k in np.unique(key):
        sel = pairs[key == k]
        labs, li = _sorted_codes(st.label[sel])
        L = len(labs)
        S = np.bincount(li, st.U[sel], L)
        a, b, t = _cross(st.fix[sel], st.fix[sel], st.ce[sel], st.cn[sel], st.Mi)
        I = np.diag(np.bincount(li, st.B[sel], L))
        np.add.at(I, (li[a], li[b]), -t)
        blocks.append((k, sel, labs, li, S, I))
    return blocks


def _fix_blocks(st, pairs):
    """:func:`_blocks` of the blocks within one fix, blocks of one size together: in a fix each label of a column
    is one pair, so a block's score is its pairs' U and its information diag(B) minus the position's share
    c_a' M^-1 c_b of each two pairs (the same numbers as :func:`_cross`, computed with the pair that comes first in
    ``st`` as a). Each block's pairs are listed in the order of their labels."""
    ncol = len(st.columns)
    key = st.fix[pairs] * ncol + st.column[pairs]
    _, rank = _sorted_codes(st.label[pairs])          # one order of the labels for every block
    o = np.lexsort((rank, key))
    ps, ks = pairs[o], key[o]
    starts = np.flatnonzero(np.r_[True, ks[1:] != ks[:-1]])
    sizes = np.diff(np.r_[starts, len(ks)])
    out = [None] * len(starts)
    for L in np.unique(sizes):
        b = np.flatnonzero(sizes == L)
        idx = ps[starts[b][:, None] + np.arange(L)]
        f = st.fix[idx[:, 0]]
        ce, cn = st.ce[idx], st.cn[idx]
        M0, M1, M2 = (st.Mi[k][f][:, None, None] for k in range(3))
        t = (ce[:, :, None] * (M0 * ce[:, None, :] + M1 * cn[:, None, :])
             + cn[:, :, None] * (M1 * ce[:, None, :] + M2 * cn[:, None, :]))
        t = np.where(idx[:, :, None] <= idx[:, None, :], t, np.swapaxes(t, 1, 2))
        info = 0.0 + -t
        diag = np.arange(L)
        info[:, diag, diag] = (0.0 + st.B[idx]) + -t[:, diag, diag]
        li = np.arange(L)
        for n, q in enumerate(b):
            sel = idx[n]
            out[q] = (ks[starts[q]], sel, st.label[sel], li, np.bincount(li, st.U[sel], L), info[n])
    return out


def _screen(st, keep, sol, m, n_grouped):
    """The per-fix test of every (fix, column) block at once, blocks of one size together (batched eigen-
    decompositions): the number of blocks tested in each fix, and the keys (fix * columns + column) of the
    blocks whose p-value is below the fix's level. The same statistics as the loop in :func:`fix_offsets`."""
    from scipy.special import chdtrc, fdtrc

    ncol = len(st.columns)
    key = st.fix[keep] * ncol + st.column[keep]
    order = np.argsort(key, kind="stable")
    pk, kk = keep[order], key[order]
    starts = np.flatnonzero(np.r_[True, kk[1:] != kk[:-1]])
    sizes = np.diff(np.r_[starts, len(kk)])
    bkey = kk[starts]
    bfix = bkey // ncol
    p = np.full(len(starts), np.nan)
    for L in np.unique(sizes):
        b = np.flatnonzero(sizes == L)
        idx = pk[starts[b][:, None] + np.arange(L)]
        f = bfix[b]
        ce, cn = st.ce[idx], st.cn[idx]
        M0, M1, M2 = (st.Mi[k][f][:, None, None] for k in range(3))
        info = -(ce[:, :, None] * (M0 * ce[:, None, :] + M1 * cn[:, None, :])
                 + cn[:, :, None] * (M1 * ce[:, None, :] + M2 * cn[:, None, :]))
        diag = np.arange(L)
        info[:, diag, diag] += st.B[idx]
        S = st.U[idx]
        w, v = np.linalg.eigh(info)
        kept = w > np.maximum(w.max(axis=-1), 0.0)[:, None] * 1e-9          # as _pinv
        winv = np.where(kept, 1.0 / np.where(kept, w, 1.0), 0.0)
        proj = np.einsum("bji,bj->bi", v, S)
        chi_full = (winv * proj ** 2).sum(axis=-1)
        r_full = kept.sum(axis=-1)
        common = n_grouped[bkey[b]] >= st.n_used[f]
        v1 = info.sum(axis=(1, 2))
        has1 = v1 > 1e-12 * np.maximum(np.trace(info, axis1=1, axis2=2), 1e-300)
        stat = np.where(common, chi_full - np.where(has1, S.sum(axis=-1) ** 2 / np.where(has1, v1, 1.0), 0.0),
                        chi_full)
        dof = np.where(common, r_full - has1, r_full)
        dof_res = st.n_used[f] - 2 - r_full
        known = sol.sd_known[f]
        floor = (sol.sd_floor_deg[f] if sol.sd_floor_deg is not None else 0.0) / sol.sd_deg[f]
        with np.errstate(invalid="ignore", divide="ignore"):
            sc = np.fmax(np.fmax(np.sqrt(np.maximum(st.rss0[f] - chi_full, 0.0) / np.maximum(dof_res, 1)), floor),
                         1e-12)
            pb = np.where(known, chdtrc(np.maximum(dof, 1), stat),
                          fdtrc(np.maximum(dof, 1), np.maximum(dof_res, 1), stat / np.maximum(dof, 1) / sc ** 2))
        p[b] = np.where((dof > 0) & (known | (dof_res >= 1)), pb, np.nan)
    valid = np.isfinite(p)
    tested = np.bincount(bfix[valid], minlength=m)
    with np.errstate(invalid="ignore", divide="ignore"):
        failing = valid & (p < OFFSET_P / np.maximum(tested[bfix], 1))
    return tested, bkey[failing]


def fix_offsets(table, g, m, sol) -> dict[int, str]:
    """The per-fix test (module docstring): {fix index: reason text} for every fix with a group off.

    Arrays from :func:`dfkit.locate.locate`: the bearings ``table``, their fix ``g``, the number of fixes ``m``
    and the solver's :class:`~dfkit.estimators.Solution`. Only bearings the fit uses and that point towards the
    fix count, and only fixes at a verified optimum are tested.
    """
    cols = group_columns(table) if len(g) else []
    if not cols:
        return {}
    sd_b = table["sd"].to_numpy(float)
    sigma = np.where(sol.sd_known[g], sd_b, sol.sd_deg[g])
    with np.errstate(invalid="ignore"):
        use = (sol.weight > 0) & sol.converged[g] & (np.cos(np.radians(sol.residual_deg)) > 0)
    st = group_stats(table, g, m, sol.residual_deg, sol.azimuth_from_fix_deg, sol.range_m, sigma, use,
                     min_group=MIN_GROUP, columns=cols)
    if st is None or not len(st.fix):
        return {}
    # a (fix, column) is tested when it has a group of MIN_GROUP bearings and its fix a residual to test it with
    keep = np.flatnonzero(np.isfinite(st.V) & (st.n_used[st.fix] >= 4))
    if not len(keep):
        return {}
    # the fix's used bearings that belong to a tested group: when all do, a turn shared by every group is the
    # fix's misfit (its chi-square test), and only differences between the groups are tested here
    n_grouped = np.zeros(m * len(st.columns))
    np.add.at(n_grouped, st.fix[keep] * len(st.columns) + st.column[keep], st.n[keep])
    # chi-square and F upper tails from scipy.special (scipy.stats computes them with the same functions; its
    # import alone took 1.3 s of a run); only for sheets that name observers (a plain sheet loads no scipy)
    from scipy.special import chdtrc, fdtrc

    # every (fix, column) block is screened at once; only the few that fail are explained one by one below
    tested, failing = _screen(st, keep, sol, m, n_grouped)
    if not len(failing):
        return {}
    ncol = len(st.columns)
    keep = keep[np.isin(st.fix[keep] * ncol + st.column[keep], failing)]
    found = []
    for key, sel, labs, li, S, I in _blocks(st, keep, per_fix=True):
        i = int(key // len(st.columns))
        common = n_grouped[key] >= st.n_used[i]
        known = bool(sol.sd_known[i])
        Ii, r_full = _pinv(I)
        chi_full = float(S @ Ii @ S)
        dof_res = int(st.n_used[i]) - 2 - r_full
        if common:
            ones = np.ones(len(S))
            v1 = ones @ I @ ones
            stat = chi_full - ((ones @ S) ** 2 / v1 if v1 > 1e-12 * max(np.trace(I), 1e-300) else 0.0)
            dof = r_full - (1 if v1 > 1e-12 * max(np.trace(I), 1e-300) else 0)
        else:
            stat, dof = chi_full, r_full
        if dof <= 0 or (not known and dof_res < 1):
            continue
        if known:
            s = 1.0

            def p_of(x, k):
                return float(chdtrc(k, x))
        else:
            floor = (sol.sd_floor_deg[i] if sol.sd_floor_deg is not None else 0.0) / sol.sd_deg[i]
            s = max(np.sqrt(max(st.rss0[i] - chi_full, 0.0) / dof_res), floor, 1e-12)

            def p_of(x, k, s=s, dof_res=dof_res):
                return float(fdtrc(k, dof_res, x / k / s ** 2))
        found.append((i, key, sel, labs, li, S, I, p_of(stat, dof), p_of, s, common, (Ii, r_full)))
    out: dict[int, str] = {}
    for i, key, sel, labs, li, S, I, p, p_of, s, common, pinv in found:
        level = OFFSET_P / tested[i]
        if not p < level:
            continue
        col = st.columns[int(key % len(st.columns))]
        j = explain(S, I, p_of, level, pinv=pinv, spread=False)       # diff_se: the sheet's texts only
        groups = [([k], j.contrast[n], j.contrast_se[n], j.contrast_p[n]) for n, k in enumerate(j.off)]
        if not common and j.rest and j.d0_p < level:
            groups.append((j.rest, j.d0, j.d0_se, j.d0_p))
        if any(pk < level and abs(np.degrees(est)) > MAX_FIX_OFFSET_DEG for _, est, _, pk in groups):
            continue        # not an offset: a wild or reflected bearing (the fix's own tests and hints say so)
        for ks, est, se, pk in groups:
            if not pk < level:
                continue
            lines = sorted(x for q, lq in zip(sel, li) if lq in ks for x in st.lines[q])
            others = [labs[k] for k in range(len(labs)) if k not in ks]
            deg, se_deg = float(np.degrees(est)), float(np.degrees(s * se))
            where = "line" + ("s " if len(lines) > 1 else " ") + ", ".join(str(x) for x in lines)
            against = (f"; against {_names(col, others)}" if others and (common or ks != j.rest) else "")
            n_t = int(tested[i])
            text = (f"{_names(col, [labs[k] for k in ks])} read{'s' if len(ks) == 1 else ''} {abs(deg):.1f}° "
                    f"(± {se_deg:.1f}) {_side(deg)} of the other bearings of this fix ({where}{against}; "
                    f"p = {pk:.1g}{f', {n_t} columns tested' if n_t > 1 else ''}): a compass or antenna offset? "
                    "calibrate it (dfkit calibrate) or check the declination")
            out[i] = (out[i] + "; " + text) if i in out else text
        if i not in out:
            text = (f"the {col}s of this fix read differently (p = {p:.1g}) but the fix cannot tell which is off: "
                    "a compass or antenna offset? calibrate them (dfkit calibrate)")
            out[i] = text
    return out


@dataclass
class SheetOffset:
    """What the whole sheet shows about the offsets of one group column (``column``): ``findings`` (warning texts),
    ``offsets`` {label: fitted offset [°]} of the labels named (or every label, alike, for a shared offset),
    ``summary`` (a short form for the reasons of marked fixes) and ``marked`` {fix index: shift in standard
    errors} of the fixes the fitted offsets move by at least :data:`SHIFT_SE`."""

    column: str
    findings: list
    offsets: dict
    summary: str
    marked: dict
    common: bool
    #: {label: standard error of its offset [°]} of the labels named against the others
    se: dict = None

    def text(self) -> str:
        return "; ".join(self.findings)

    def reason(self, shift, calibrated: bool = False) -> str:
        """The text for a marked fix; ``calibrated``: the fix's SD came from a calibration, whose bias removal left
        this offset."""
        what = ("check the declination and the north of the bearings" if self.common
                else "the calibration in use leaves this offset: check it with more beacon trials (dfkit calibrate)"
                if calibrated else "calibrate it (dfkit calibrate) and use --calibration")
        return (f"{self.summary} over the sheet (see the summary); without that offset this fix moves by "
                f"{shift:.1f} standard errors, so its region may miss: {what}")


def fix_azimuths(table, bearings, g, azimuth_deg=None) -> np.ndarray:
    """Each bearing's geodesic azimuth from its fix to its station [°]: ``azimuth_deg`` when given (the solver's,
    :attr:`dfkit.locate.Fixes.azimuth_deg`, taken within ``tol_m`` of the written fix: not bit for bit the
    azimuth from it), else computed from the ``table``'s position (NaN where no position)."""
    if azimuth_deg is not None and len(azimuth_deg) == len(bearings):
        return np.asarray(azimuth_deg, float)
    from dfkit import geodesy

    flat, flon = table["lat"].to_numpy(float), table["lon"].to_numpy(float)
    az, _, _ = geodesy.inverse(flat[g], flon[g], bearings["lat"].to_numpy(float), bearings["lon"].to_numpy(float))
    return az


def sheet_offsets(table, bearings, with_position, azimuth_deg=None) -> list[SheetOffset]:
    """The sheet-wide test (module docstring) on a located sheet: ``table`` and ``bearings`` of
    :class:`~dfkit.locate.Fixes`, ``with_position`` per fix. Bearings off by more than
    :data:`dfkit.policy.WILD_SD` SDs are left out of the pooling (they are named in their fixes).

    An estimated SD is one value for the whole sheet (the median of the fixes' estimates) and is then used as if
    known: with the hundreds of bearings a sheet-wide test needs, its own uncertainty is small (a few per cent).
    ``azimuth_deg``: each bearing's azimuth from its fix (:func:`fix_azimuths`).
    """
    from dfkit.policy import WILD_SD

    b = bearings
    m = len(table)
    if not len(b) or not m:
        return []
    cols = group_columns(b)
    if not cols:
        # no observer, team ... named: the whole sheet is one group, so a turn shared by every bearing (a
        # declination or north mistake, the commonest of all) is still tested
        cols = [WHOLE_SHEET]
    g = b["fix_id"].to_numpy(dtype=np.int64)
    az = fix_azimuths(table, b, g, azimuth_deg)
    known = table["sd_source"].isin(KNOWN_SD_SOURCES).to_numpy()
    # an estimated SD is one value for the whole sheet (the fixes' median): weighting each fix by its own estimate
    # would down-weight the fixes where the offset shows most (it inflates their estimate) and bias the pooled offset
    est = table["sd_deg"].to_numpy(float)[~known & with_position]
    est_sd = float(np.nanmedian(est)) if np.isfinite(est).any() else np.nan
    sigma = np.where(known[g], b["sd"].to_numpy(float), est_sd)
    r = b["residual_deg"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        fit = with_position[g] & (np.abs(r) < 90.0)
        # wild bearings are judged about the sheet's median residual, whatever the fit's weight: a turn shared by
        # every bearing (magnetic bearings read as true, 15° at high latitudes) can exceed WILD_SD SDs, and judged
        # about 0, or by a robust fit's weights (Andrews' drops turned lines), its bearings would be left out of
        # the very test that finds it
        # (only when the median lies a typical SD or more from 0: trimmed about a median a little off by chance,
        # the pooled bearings would lean its way, and a clean sheet with many wild bearings showed a turn of 1°)
        centre = 0.0
        if fit.any():
            centre = float(np.median(r[fit]))
            if not abs(centre) >= float(np.median(sigma[fit])):
                centre = 0.0
        use = fit & (np.abs(r - centre) <= WILD_SD * sigma)
    st = group_stats(b, g, m, r, az, b["range_m"].to_numpy(float), sigma, use, min_group=1, columns=cols,
                     with_lines=False)
    if st is None or not len(st.fix):
        return []
    pairs = np.flatnonzero(np.isfinite(st.V) & (st.n_used[st.fix] >= 3))
    if not len(pairs):
        return []
    from dfkit.regions import chi2_sf      # no scipy: every sheet runs this test (a plain one as one group)

    def p_of(x, k):
        return float(chi2_sf(x, int(k)))

    blocks = _blocks(st, pairs, per_fix=False)
    level = SHEET_OFFSET_P / len(blocks)
    st2 = None
    out = []
    for key, sel, labs, li, S, I in blocks:
        Ii, r_full = _pinv(I)
        if _n_fixes(st.fix[sel]) < MIN_SHEET_FIXES:
            continue        # one fix is the per-fix test's business
        if r_full == 0 or not p_of(float(S @ Ii @ S), r_full) < level:
            continue
        col = str(st.columns[int(key)])
        j = explain(S, I, p_of, level)
        nf = np.array([_n_fixes(st.fix[sel][li == k]) for k in range(len(labs))])
        nb = np.bincount(li, st.n[sel], len(labs)).astype(int)
        findings, offsets, short, named_se = [], {}, [], {}
        delta = np.zeros(len(labs))
        indistinct = False
        for n, k in enumerate(j.off):
            if not j.contrast_p[n] < level:
                continue
            deg, se = float(np.degrees(j.contrast[n])), float(np.degrees(j.contrast_se[n]))
            fixes_k = f"{nf[k]} fix{'es' if nf[k] != 1 else ''}"
            findings.append(f"{col} {labs[k]} reads on average {abs(deg):.1f}° (± {se:.1f}) {_side(deg)} of "
                            f"{_names(col, labs[j.rest]) if j.rest else 'the fixes'} ({nb[k]} bearings in {fixes_k}; "
                            f"p = "
                            f"{j.contrast_p[n]:.1g}): a compass or antenna offset? calibrate it (dfkit calibrate)")
            offsets[str(labs[k])] = deg
            named_se[str(labs[k])] = se
            short.append(f"{col} {labs[k]} reads {abs(deg):.1f}° {_side(deg)} of the others")
            delta[k] = j.contrast[n]
        if j.rest and j.d0_p < level:
            deg, se = float(np.degrees(j.d0)), float(np.degrees(j.d0_se))
            n_rest = int(nb[j.rest].sum())
            f_rest = _n_fixes(st.fix[sel][np.isin(li, j.rest)])
            alike = ("the bearings of this sheet read on average" if col == WHOLE_SHEET else
                     f"{col} {labs[0]} reads on average" if len(labs) == 1 else
                     "the bearings of this sheet read on average" if not j.off else
                     f"{_names(col, labs[j.rest])} read{'s' if len(j.rest) == 1 else ''} on average")
            tell = ("" if len(labs) < 2 else
                    f"; the fixes do not tell the {col}s apart (one against the others is known only to "
                    f"± {np.degrees(j.diff_se):.1f}°), so one {col} alone reading off could look the same"
                    if not np.degrees(j.diff_se) < abs(deg) / 2 else
                    f", all {col}s alike (one against the others is known to ± {np.degrees(j.diff_se):.1f}°)")
            indistinct = len(labs) >= 2 and not np.degrees(j.diff_se) < abs(deg) / 2
            fixes_r = f"{f_rest} fix{'es' if f_rest != 1 else ''}"
            findings.append(f"{alike} {abs(deg):.1f}° (± {se:.1f}) {_side(deg)} of the fixes ({n_rest} bearings "
                            f"in {fixes_r}; p = {j.d0_p:.1g}{tell}): a declination or north mistake, or an "
                            f"offset shared by every compass? check the declination and the north of the bearings")
            for k in j.rest:
                offsets[str(labs[k])] = deg
            short.insert(0, f"{'the bearings' if not j.off else _names(col, labs[j.rest])} read "
                            f"{abs(deg):.1f}° {_side(deg)}")
            delta[j.rest] = j.d0
            delta[j.off] += j.d0
            for k in j.off:      # a label named against the rest reads its own offset and the rest's
                offsets[str(labs[k])] = float(np.degrees(delta[k]))
        if not findings:
            findings.append(f"the {col}s of this sheet read differently (p = {j.lof_p:.1g}) but the fixes do not "
                            f"tell which is off: a compass or antenna offset? calibrate them (dfkit calibrate)")
            out.append(SheetOffset(column=col, findings=findings, offsets={}, summary="", marked={}, common=False))
            continue
        # the shift the fitted offsets cause in every fix, its wild bearings included (they move it too)
        if st2 is None:        # (most sheets have no finding: then not needed)
            with np.errstate(invalid="ignore"):
                every = with_position[g] & (b["weight"].to_numpy(float) > 0) & (np.abs(r) < 90.0)
            st2 = group_stats(b, g, m, r, az, b["range_m"].to_numpy(float), sigma, every, min_group=1, columns=cols,
                              with_lines=False)
        pk = np.flatnonzero((st2.column == key) & np.isfinite(st2.ce))
        lookup = {str(x): d for x, d in zip(labs, delta)}
        dl = np.array([lookup.get(str(x), 0.0) for x in st2.label[pk]])
        ve = np.bincount(st2.fix[pk], st2.ce[pk] * dl, m)
        vn = np.bincount(st2.fix[pk], st2.cn[pk] * dl, m)
        Mi = st2.Mi
        with np.errstate(invalid="ignore"):
            shift = np.sqrt(np.maximum(ve * (Mi[0] * ve + Mi[1] * vn) + vn * (Mi[1] * ve + Mi[2] * vn), 0.0))
        if indistinct:
            # the fixes cannot tell a shared turn from one label alone reading off: a fix is judged by the
            # explanation that moves it most (one label's offset fitted alone, S_k / I_kk), since the data do not
            # rule it out (a trial: observer C 5° off, one bearing each, read as a shared 1.8° turn that moved no
            # fix, and the ok fixes held the truth 86.7 %)
            for k in range(len(labs)):
                if not I[k, k] > 0:
                    continue
                alone = abs(S[k] / I[k, k])
                pk_k = pk[st2.label[pk].astype(str) == str(labs[k])]
                np.fmax.at(shift, st2.fix[pk_k], alone * np.sqrt(np.maximum(st2.shift[pk_k], 0.0)))
            short.append(f"or one {col} alone reading off (the fixes cannot tell which)")
        marked = {int(i): float(shift[i]) for i in np.flatnonzero(np.isfinite(shift) & (shift >= SHIFT_SE))}
        out.append(SheetOffset(column=col, findings=findings, offsets=offsets, summary="; ".join(short),
                               marked=marked, common=not j.off, se=named_se))
    return out
