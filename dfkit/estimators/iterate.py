"""Planar iterations for many fixes at once, each in its own (fixed) plane.

All fixes still moving iterate together with ``np.bincount`` sums; finished
fixes drop out of the arrays, so a few slow fixes never cost a pass over all.
Every loop reports how each fix ended (:data:`SETTLED` ... :data:`MAX_ITER`).
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators import stansfield
from dfkit.estimators.groups import gsum, solve2
from dfkit.estimators.lsq import planar_point
from dfkit.estimators.plane import residuals, sin_cos_residuals

#: How a planar iteration ended, per fix.
RUNNING, SETTLED, RUNAWAY, SINGULAR, STALLED, MAX_ITER = range(6)
#: Matrices whose |det| / (trace/2)^2 is below this are singular (the lines of sight are parallel).
SINGULAR_RATIO = 1e-14
#: Armijo's sufficient-decrease constant and the most step halvings tried (J. Nocedal & S. J. Wright,
#: *Numerical Optimization*, 2nd ed., Springer, 2006, ch. 3, backtracking line search [from memory]).
ARMIJO = 1e-4
MAX_HALVINGS = 40
#: Changes of the objective below this fraction of it are not told apart from rounding: a step whose whole
#: predicted change is smaller is judged by the model (accepted unless the objective rose by more), as is a
#: step already below the tolerance. (A numerical bound, no field value: near the optimum the decrease of a
#: Newton step of 10 micrometres is about 1e-16 of the objective, far below what a sum of rounded terms
#: resolves, and halving such steps by chance ended fixes micrometres, on sheets with a wild bearing up to
#: a millimetre or two, short of the optimum.)
FLAT = 1e-12
#: A whole Newton step (positive definite matrix) shorter than this many tolerances settles a fix: Newton's
#: method leaves an error of about step^2 / range after it (range: the distance to the stations), so the round
#: that would only confirm it is skipped. With the planar tolerance tol (1e-6 m by default) a settling step is
#: under 100 tol = 1e-4 m and leaves about 1e-10 m from stations 100 m away; a caller's larger tol leaves
#: (100 tol)^2 / range, still within the outer tolerance.
NEWTON_SETTLE = 100.0
#: Halvings of a failed step tried at once (one pass over the few fixes' bearings instead of one each);
#: all that are left when they take fewer than SMALL_BATCH trial bearings.
BATCH = 8
SMALL_BATCH = 20_000
#: Halvings tried at once first, from the first one not proven to fail (usually the one that passes).
FIRST_BLOCK = 2


class _Compact:
    """The fixes still running and their bearings, re-packed when many have finished."""

    def __init__(self, cg, mg):
        self.grp = np.arange(mg)
        self.idx = np.arange(len(cg))
        self.cg = cg

    def refresh(self, running):
        live = running[self.grp]
        if live.sum() < 0.7 * len(self.grp):
            keep = live[self.cg]
            self.grp = self.grp[live]
            self.idx = self.idx[keep]
            self.cg = (np.cumsum(live) - 1)[self.cg[keep]]      # the new numbers of the fixes kept

    def rounds(self, ending, max_iter):
        """Up to ``max_iter`` rounds while any fix is running: yields (bearings, fixes, their compact fix index)."""
        for _ in range(max_iter):
            running = ending == RUNNING
            if not running.any():
                return
            self.refresh(running)
            yield self.idx, self.grp, self.cg


class _Packed:
    """The fixes still running and their bearings' arrays, packed (filtered) when many have finished.

    ``b`` maps names to per-bearing arrays (read only, or the state written by :func:`optimise`); ``cg``
    numbers each bearing's fix within ``grp``, the fixes (original numbers) still held."""

    def __init__(self, b, cg, mg):
        self.b = b
        self.cg = cg
        self.grp = np.arange(mg)

    def pack(self, running):
        live = running[self.grp]
        if live.sum() < 0.7 * len(self.grp):
            keep = live[self.cg]
            self.b = {k: v[keep] for k, v in self.b.items()}
            self.cg = (np.cumsum(live) - 1)[self.cg[keep]]
            self.grp = self.grp[live]


class _AngleForm:
    """Residuals as angles r (an arctan2 per bearing), for methods whose terms take r."""

    names = ("r",)

    def __init__(self, method):
        self.terms, self.obj = method.terms, method.objective

    def at(self, b, x, y, at=None):
        r, dx, dy, d2 = residuals(b["sp"], b["cp"], b["sx"], b["sy"], x, y, at)
        return dict(r=r, dx=dx, dy=dy, d2=d2)

    @staticmethod
    def at_centre(geo, b):
        """At the plane's centre the residuals are the geodesic ones."""
        return dict(r=geo.r.copy(), dx=-geo.sx, dy=-geo.sy, d2=geo.d * geo.d)

    def objective(self, st, b, c):
        return self.obj(st["r"], b["w"], b["s"], c)

    def slopes(self, b, c):
        return self.terms(b["r"], b["w"], b["s"], c)[1:]


class _SinCosForm:
    """Residuals as sin r and cos r (no arctan2), for methods with ``sc_terms`` (Lenth's likelihood)."""

    names = ("sn", "cs")

    def __init__(self, method):
        self.terms, self.obj = method.sc_terms, method.sc_objective

    def at(self, b, x, y, at=None):
        sn, cs, dx, dy, d2 = sin_cos_residuals(b["sp"], b["cp"], b["sx"], b["sy"], x, y, at)
        return dict(sn=sn, cs=cs, dx=dx, dy=dy, d2=d2)

    def at_centre(self, geo, b):
        """At the plane's centre (the same residuals as the geodesic ones, to rounding)."""
        return self.at(b, 0.0, 0.0)

    def objective(self, st, b, c):
        return self.obj(st["sn"], st["cs"], b["w"], b["s"], c)

    def slopes(self, b, c):
        return self.terms(b["sn"], b["cs"], b["w"], b["s"], c)


def optimise(method, geo, cg, mg, x, y, w, s, c, tol, max_iter, r_run, settle=None):
    """Minimise sum f(r_i) for every fix from (x, y): Newton steps where the Newton matrix is
    positive definite, scoring (re-weighted) steps elsewhere; a step is accepted only if it
    lowers the objective enough (Armijo), else it is halved.

    ``method`` is a registry entry (:class:`dfkit.estimators.registry.Method`): its ``sc_terms``
    (from sin r and cos r) when it has them, else its ``terms`` of r. Each round takes the Newton
    step of every running fix and tries it whole on all of them at once; only the few fixes whose
    objective did not fall enough go on halving (:func:`_halve`). Returns x, y, ending, iterations.

    ``settle`` (metres, optional): a whole Newton step shorter than this settles a fix (default
    :data:`NEWTON_SETTLE` times ``tol``).
    """
    settle = NEWTON_SETTLE * tol if settle is None else settle
    form = _SinCosForm(method) if method.sc_terms is not None else _AngleForm(method)
    x = np.array(x, float)
    y = np.array(y, float)
    ending = np.zeros(mg, np.int8)
    iters = np.zeros(mg, np.int64)
    b = dict(sp=geo.sp, cp=geo.cp, sx=geo.sx, sy=geo.sy, w=w, s=s)
    if not (x.any() or y.any()):
        b.update(form.at_centre(geo, b))
    else:
        b.update(form.at(b, x, y, cg))
    F = gsum(cg, form.objective(b, b, c), mg)
    work = _Packed(b, cg, mg)
    state = form.names + ("dx", "dy", "d2")
    for _ in range(max_iter):
        running = ending == RUNNING
        if not running.any():
            break
        work.pack(running)
        b, grp, bcg = work.b, work.grp, work.cg
        sx_, sy_, b1, b2, ratio, newton = _newton(form.slopes(b, c), b["dx"], b["dy"], b["d2"], bcg, len(grp))
        live = running[grp]
        singular = live & (~np.isfinite(sx_) | ~np.isfinite(sy_) | (ratio < SINGULAR_RATIO))
        ending[grp[singular]] = SINGULAR
        live &= ~singular
        sx_ = np.where(live, sx_, 0.0)
        sy_ = np.where(live, sy_, 0.0)
        slope = -(b1 * sx_ + b2 * sy_)          # directional derivative of the objective along the step
        step_len = np.hypot(sx_, sy_)
        # the whole step, tried on every fix held at once
        xt, yt = x[grp] + sx_, y[grp] + sy_
        trial = form.at(b, xt, yt, bcg)
        Ft = gsum(bcg, form.objective(trial, b, c), len(grp))
        ok, floor = _armijo(Ft, F[grp], 1.0, slope, step_len, tol)
        ok &= live
        floor &= live
        fixes = grp[ok]
        x[fixes], y[fixes], F[fixes] = xt[ok], yt[ok], Ft[ok]
        # the trial's arrays become the state, with the old values put back at the few bearings not accepted
        # (the values of a copy where accepted, without a pass over every bearing per array)
        keep = np.flatnonzero(~ok[bcg])
        for k in state:
            t = trial[k]
            t[keep] = b[k][keep]
            b[k] = t
        lam = np.where(floor, 0.0, 1.0)
        accepted = ok | floor
        searching = live & ~accepted
        if searching.any():
            lam[searching] = 0.5
            _halve(form, b, grp, bcg, np.flatnonzero(searching), x, y, F, sx_, sy_, lam, slope, step_len,
                   accepted, c, tol, state)
            searching &= ~accepted
        ending[grp[searching]] = STALLED
        moved = lam * step_len
        settled = accepted & ((moved < tol) | (ok & newton & (moved < settle)))
        ending[grp[settled]] = SETTLED
        iters[grp[live]] += 1
        far = accepted & ~settled
        far[far] = np.hypot(x[grp[far]], y[grp[far]]) > r_run[grp[far]]
        ending[grp[far]] = RUNAWAY
    ending[ending == RUNNING] = MAX_ITER
    return x, y, ending, iters


def _newton(slopes, dx, dy, d2, cg, n_g):
    """The step of each fix: Newton's where its matrix is positive definite, scoring's elsewhere.

    Returns the step (sx, sy), the gradient (b1, b2), the conditioning ratio of the matrix used and whether
    it was Newton's."""
    f1, a, f2 = slopes
    # (in place, a few per-bearing arrays at a time; the values are those of the formulas in the comments)
    tmp = np.divide(1.0, d2)                          # inv = 1 / d2
    gx = dy * tmp                                     # gradient of the predicted bearing: dy inv, -dx inv
    gy = np.negative(dx)
    gy *= tmp
    np.multiply(f1, gx, out=tmp)
    b1 = gsum(cg, tmp, n_g)
    np.multiply(f1, gy, out=tmp)
    b2 = gsum(cg, tmp, n_g)
    # Newton matrix of sum f(r): f'' g g^T - f' dg/dP, dg/dP = [[-2xy, x2-y2], [x2-y2, 2xy]] / d^4, which
    # is [[2 gx gy, gy^2 - gx^2], [gy^2 - gx^2, -2 gx gy]] in terms of g
    q = gx * gy
    p = np.multiply(gx, gx, out=gx)                   # p, q, t = gx^2, gx gy, gy^2
    t = np.multiply(gy, gy, out=gy)
    del gx, gy
    two = np.subtract(t, p)                           # h12 = sum f2 q - f1 (t - p)
    two *= f1
    np.multiply(f2, q, out=tmp)
    tmp -= two
    h12 = gsum(cg, tmp, n_g)
    fq = np.multiply(2.0, f1, out=two)                # fq = 2 f1 q
    fq *= q
    np.multiply(f2, p, out=tmp)                       # h11 = sum f2 p - fq
    tmp -= fq
    h11 = gsum(cg, tmp, n_g)
    np.multiply(f2, t, out=tmp)                       # h22 = sum f2 t + fq
    tmp += fq
    h22 = gsum(cg, tmp, n_g)
    del tmp, fq, two
    nonpd = ~((h11 > 0) & (h11 * h22 - h12 * h12 > 0))
    if nonpd.any():
        # the scoring matrix, summed over the bearings of those fixes only
        pos = np.cumsum(nonpd) - 1
        sel = nonpd[cg]
        sg = pos[cg[sel]]
        a = np.broadcast_to(a, sel.shape)[sel]
        n_j = pos[-1] + 1
        j = [gsum(sg, a * v[sel], n_j) for v in (p, q, t)]
        for h, jj in zip((h11, h12, h22), j):             # (arrays of this round, not shared)
            h[nonpd] = jj
    sx_, sy_, ratio = solve2(h11, h12, h22, b1, b2)
    return sx_, sy_, b1, b2, ratio, ~nonpd


def _armijo(Ft, Fo, lam, slope, step_len, tol):
    """Whether a trial point is accepted (it lowers the objective enough, or the step is too small for the
    objective to judge and it did not rise measurably: :data:`FLAT`), and whether the step is at the floor:
    already below the tolerance and not accepted."""
    tiny = lam * step_len < tol
    flat = np.abs(Fo) * FLAT
    ok = (Ft <= Fo + ARMIJO * lam * slope) | ((tiny | (lam * np.abs(slope) < flat)) & (Ft <= Fo + flat))
    return ok, ~ok & tiny


def _halve(form, b, grp, bcg, sel_g, x, y, F, sx_, sy_, lam, slope, step_len, accepted, c, tol, state):
    """Halve the steps of the fixes ``sel_g`` (held numbers) until each is accepted or at the floor, at most
    ``MAX_HALVINGS - 1`` times (the whole step was the first try); updates x, y, F, the bearings' state in
    ``b``, ``lam`` and ``accepted``. Each fix takes the first halving that passes, as halving one at a time
    would (the same lengths, bit for bit: powers of two).

    The halvings a single bearing already proves to fail are not evaluated (:func:`_proven_to_fail`): a fit
    creeping onto a station overshoots it with every long step, and needs one more halving each round. The
    others are tried :data:`FIRST_BLOCK` at a time, then :data:`BATCH` at a time (all that are left when they
    take fewer than :data:`SMALL_BATCH` trial bearings)."""
    pos = np.full(len(grp), -1)
    pos[sel_g] = np.arange(len(sel_g))
    local = pos[bcg]
    bsub = np.flatnonzero(local >= 0)
    local = local[bsub]
    total = MAX_HALVINGS - 1
    fx = grp[sel_g]
    lam0, Fo, sl, sl_len = lam[sel_g], F[fx], slope[sel_g], step_len[sel_g]
    x0, y0, ux, uy = x[fx], y[fx], sx_[sel_g], sy_[sel_g]
    start = _first_unproven(form, b, bsub, local, len(sel_g), lam0, x0, y0, ux, uy, Fo, sl, sl_len, c, tol, total)
    cols = np.arange(len(sel_g))               # each fix still searching: its column in the arrays above
    kk = FIRST_BLOCK
    while len(cols):
        n, nb = len(cols), len(bsub)
        h = start[cols] + np.arange(kk)[:, None]                              # (kk, n) halvings tried
        valid = h < total
        lams = lam0[cols] * 0.5 ** np.minimum(h, total - 1)
        xt = x0[cols] + lams * ux[cols]
        yt = y0[cols] + lams * uy[cols]
        owner = (np.arange(kk)[:, None] * n + local).ravel()
        # the bearings' own arrays once, (nb,), broadcast against the (kk, nb) trial points: the same
        # element-wise values as kk stacked copies, summed in the same order
        sub = {k: b[k][bsub] for k in ("sp", "cp", "sx", "sy", "w", "s")}
        trial = form.at(sub, xt[:, local], yt[:, local])
        Ft = gsum(owner, form.objective(trial, sub, c).ravel(), kk * n).reshape(kk, n)
        ok, floor = _armijo(Ft, Fo[cols], lams, sl[cols], sl_len[cols], tol)
        ok &= valid
        floor &= valid
        first = np.argmax(ok | floor, axis=0)                             # the first try that passes
        at = np.arange(n)
        hit = (ok | floor)[first, at]
        took = hit & ok[first, at]
        if took.any():
            fixes = fx[cols[took]]
            x[fixes], y[fixes], F[fixes] = (v[first[took], at[took]] for v in (xt, yt, Ft))
            bj = np.flatnonzero(took[local])
            for k in state:
                b[k][bsub[bj]] = trial[k][first[local[bj]], bj]
        accepted[sel_g[cols[hit]]] = True
        lam[sel_g[cols]] = np.where(took, lams[first, at], np.where(hit, 0.0, lam0[cols] * 0.5 ** total))
        start[cols] += kk
        keep = ~hit & (start[cols] < total)
        if not keep.all():
            kb = keep[local]
            bsub = bsub[kb]
            local = (np.cumsum(keep) - 1)[local[kb]]
            cols = cols[keep]
        left = total - start[cols].min() if len(cols) else 0
        kk = left if len(bsub) * left <= SMALL_BATCH else min(BATCH, left)


def _first_unproven(form, b, bsub, local, n, lam0, x0, y0, ux, uy, Fo, slope, step_len, c, tol, total):
    """Per fix, the first of its ``total`` halvings that :func:`_proven_to_fail` cannot rule out (``total``
    where it rules out all), looked at :data:`BATCH` halvings at a time (all at once for few fixes)."""
    # one bearing per fix, one whose station is nearest the point (any bearing would do: only how much the
    # proof rules out depends on which)
    d2 = b["d2"][bsub]
    dmin = np.full(n, np.inf)
    np.minimum.at(dmin, local, d2)
    at_min = np.flatnonzero(d2 == dmin[local])
    near = np.empty(n, np.int64)
    near[local] = bsub                               # (a bearing of each fix, should its distances be NaN)
    near[local[at_min]] = bsub[at_min]
    sub = {k: b[k][near] for k in ("sp", "cp", "sx", "sy", "w", "s")}
    start = np.full(n, total)
    cols = np.arange(n)
    block = total if n * total <= SMALL_BATCH else BATCH
    for lo in range(0, total, block):
        h = np.arange(lo, min(lo + block, total))[:, None]
        part = {k: v[cols] for k, v in sub.items()}
        fails = _proven_to_fail(form, part, lam0[cols] * 0.5 ** h, x0[cols], y0[cols], ux[cols], uy[cols], Fo[cols],
                                slope[cols], step_len[cols], c, tol)
        found = ~fails.all(axis=0)
        start[cols[found]] = lo + np.argmax(~fails[:, found], axis=0)
        cols = cols[~found]
        if not len(cols):
            break
    return start


def _proven_to_fail(form, sub, lams, x0, y0, ux, uy, Fo, slope, step_len, c, tol):
    """(halvings, fixes): whether the halving surely fails the test of :func:`_armijo`, judged from one bearing
    of each fix (``sub``: its arrays, one value per fix), the one whose station is nearest the point.

    Every bearing's term of the objective is at least 0, and a sum of such terms in floating point is at
    least each of them (rounding to nearest is monotone), so a trial whose one term already exceeds what the
    test allows fails it: this is exact, not a model. The term is computed by the same operations on the same
    numbers as in the full evaluation. Halvings short enough to end the search at the floor are never
    skipped."""
    xt = x0 + lams * ux
    yt = y0 + lams * uy
    with np.errstate(all="ignore"):
        lb = form.objective(form.at(sub, xt, yt), sub, c)
        ok, floor = _armijo(lb, Fo, lams, slope, step_len, tol)     # the test itself, on the one term
    return ~(ok | floor)


#: Plain re-weighting rounds before Stansfield's fixed point is searched by Newton's method on T(x) - x.
PLAIN_ROUNDS = 8
#: Newton rounds in a row that fail to shrink |T(x) - x| before a fixed-point search is called stalled (it sits
#: at a local minimum of |T(x) - x| that is no fixed point).
STALL_ROUNDS = 6


def fixed_point(geo, cg, mg, x, y, w, tol, max_iter, r_run):
    """Stansfield's re-weighted least squares from (x, y) until the point stops moving.

    The fixed point is x = T(x), T the weighted least-squares point with ranges from x
    (:func:`dfkit.estimators.stansfield.step`). The plain iteration x <- T(x) converges only
    linearly, and with a wild bearing it can crawl (rates near 1) or circle a fixed point it
    never reaches; so after :data:`PLAIN_ROUNDS` rounds a fix still moving takes Newton steps on
    G(x) = T(x) - x (Jacobian by forward differences), each accepted only if it shrinks |G|, and a
    step of the plain iteration otherwise. A plain step that turns back on the previous one is halved
    (down to 1/64). Returns x, y, ending, iterations.
    """
    x = np.array(x, float)
    y = np.array(y, float)
    ending = np.zeros(mg, np.int8)
    iters = np.zeros(mg, np.int64)
    damp = np.ones(mg)
    last = np.full(mg, np.inf)
    lx = np.zeros(mg)
    ly = np.zeros(mg)
    failed_newton = np.zeros(mg, np.int64)
    for rnd, (idx, grp, bcg) in enumerate(_Compact(cg, mg).rounds(ending, max_iter)):
        running = ending == RUNNING
        n_g = len(grp)
        sx_b, sy_b, sp_b, cp_b, w_b = geo.sx[idx], geo.sy[idx], geo.sp[idx], geo.cp[idx], w[idx]

        def T(px, py):
            return stansfield.step(bcg, n_g, sx_b, sy_b, sp_b, cp_b, w_b, px, py)

        qx, qy, ratio = T(x[grp], y[grp])
        live = running[grp]
        singular = live & (~np.isfinite(qx) | ~np.isfinite(qy) | (ratio < SINGULAR_RATIO))
        ending[grp[singular]] = SINGULAR
        live &= ~singular
        stepx = np.where(live, qx - x[grp], 0.0)
        stepy = np.where(live, qy - y[grp], 0.0)
        step = np.hypot(stepx, stepy)
        newton = np.zeros(n_g, bool)
        if rnd >= PLAIN_ROUNDS and live.any():
            nx_, ny_, ok = _newton_fixed_point(T, x[grp], y[grp], stepx, stepy, step, r_run[grp])
            newton = live & ok
            failed_newton[grp] = np.where(live & ~ok, failed_newton[grp] + 1, 0)
        with np.errstate(invalid="ignore"):
            reverse = live & ~newton & (stepx * lx[grp] + stepy * ly[grp] < 0) & (step >= 0.5 * last[grp])
        damp[grp] = np.where(reverse, np.maximum(damp[grp] * 0.5, 1.0 / 64.0), damp[grp])
        last[grp] = np.where(live, step, last[grp])
        stepx = np.where(newton, nx_ if newton.any() else 0.0, stepx * damp[grp])
        stepy = np.where(newton, ny_ if newton.any() else 0.0, stepy * damp[grp])
        lx[grp], ly[grp] = stepx, stepy
        x[grp] += stepx
        y[grp] += stepy
        iters[grp[live]] += 1
        ending[grp[live & (step < tol)]] = SETTLED
        far = live & (step >= tol) & (np.hypot(x[grp], y[grp]) > r_run[grp])
        ending[grp[far]] = RUNAWAY
        ending[grp[live & (step >= tol) & ~far & (failed_newton[grp] >= STALL_ROUNDS)]] = STALLED
    ending[ending == RUNNING] = MAX_ITER
    return x, y, ending, iters


def _newton_fixed_point(T, x, y, gx, gy, gnorm, r_run):
    """Newton steps for G(x) = T(x) - x at (x, y) with G = (gx, gy), backtracked (1, 1/2, 1/4) until |G|
    shrinks: the steps and whether one was found."""
    h = np.maximum(1e-7 * r_run, 1e-4)                       # forward-difference step [m]
    tx1, ty1, _ = T(x + h, y)
    tx2, ty2, _ = T(x, y + h)
    # Jacobian of G: dT/dx - I
    a11 = (tx1 - x - h - gx) / h
    a21 = (ty1 - y - gy) / h
    a12 = (tx2 - x - gx) / h
    a22 = (ty2 - y - h - gy) / h
    det = a11 * a22 - a12 * a21
    with np.errstate(divide="ignore", invalid="ignore"):
        dx = -(a22 * gx - a12 * gy) / det
        dy = -(-a21 * gx + a11 * gy) / det
    good = np.isfinite(dx) & np.isfinite(dy)
    dx = np.where(good, dx, 0.0)
    dy = np.where(good, dy, 0.0)
    lam = np.zeros(len(x))
    for step in (0.25, 0.5, 1.0):                          # the largest step that shrinks |G| wins
        qx, qy, _ = T(x + step * dx, y + step * dy)
        with np.errstate(invalid="ignore"):
            shrinks = good & (np.hypot(qx - x - step * dx, qy - y - step * dy) < (1.0 - ARMIJO * step) * gnorm)
        lam = np.where(shrinks, step, lam)
    return lam * dx, lam * dy, lam > 0


def closed_form(geo, cg, mg, r_run):
    """The least-squares point of every fix in its plane. Returns x, y, ending, iterations."""
    x, y, ratio = planar_point(cg, mg, geo.sx, geo.sy, geo.sp, geo.cp, np.ones(len(cg)))
    ending = np.full(mg, SETTLED, np.int8)
    singular = ~np.isfinite(x) | ~np.isfinite(y) | (ratio < SINGULAR_RATIO)
    ending[singular] = SINGULAR
    x = np.where(singular, 0.0, x)
    y = np.where(singular, 0.0, y)
    ending[~singular & (np.hypot(x, y) > r_run)] = RUNAWAY
    return x, y, ending, np.ones(mg, np.int64)
