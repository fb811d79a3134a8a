"""Likelihood-ratio regions against an outside computation: geographiclib residuals, scipy quantiles and optimisers."""

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from scipy import optimize, stats

from dfkit import estimators, regions

WGS = Geodesic.WGS84


def S_exact(stations, bearings, weights, p):
    """S(x) = sum w_i r_i^2 with geographiclib residuals r_i (radians) at the point p = (lat, lon)."""
    az = np.array([WGS.Inverse(a, b, p[0], p[1])["azi1"] for a, b in stations])
    r = np.radians((np.asarray(bearings) - az + 180.0) % 360.0 - 180.0)
    return float(np.sum(np.asarray(weights) * r * r))


def solve_and_regions(stations, bearings, sd=None, method="mle", level=0.95, **kw):
    st = np.asarray(stations, float)
    g = np.zeros(len(st), int)
    s = estimators.solve(st[:, 0], st[:, 1], bearings, g, 1, None if sd is None else np.full(len(st), sd),
                         method=method)
    L = regions.likelihood_regions(s.lat, s.lon, g, st[:, 0], st[:, 1], bearings, s.range_m,
                                   s.azimuth_from_fix_deg, s.residual_deg, s.region_weight, s.sd_known, s.dof,
                                   level, **kw)
    return s, L


def reference_threshold(stations, bearings, weights, fix, known, n, level=0.95):
    """S_min by Nelder-Mead on geographiclib residuals, and the region's bound from scipy.stats
    (Beale 1960; Bates & Watts 1988): S_min + chi2_2(level) for a known SD, S_min (1 + 2 F / (n - 2)) else."""
    x0 = np.array(fix)
    simplex = np.array([x0, x0 + [2e-4, 0], x0 + [0, 2e-4]])
    res = optimize.minimize(lambda p: S_exact(stations, bearings, weights, p), x0, method="Nelder-Mead",
                            options={"xatol": 1e-9, "fatol": 1e-13, "maxiter": 3000, "initial_simplex": simplex})
    s_min = min(res.fun, S_exact(stations, bearings, weights, fix))
    if known:
        return s_min + stats.chi2.ppf(level, 2)
    return s_min * (1 + 2 * stats.f.ppf(level, 2, n - 2) / (n - 2))


TGT = (47.01, 15.01)


def bearings_to(stations, target, noise):
    return np.array([WGS.Inverse(a, b, *target)["azi1"] % 360 for a, b in stations]) + np.asarray(noise)


CASES = {
    "two at 90 degrees, known SD": ([(47.0, 15.01), (47.01, 14.995)], [1.0, -2.0], 3.0),
    "three, known SD": ([(47.0, 15.0), (47.0, 15.02), (47.02, 15.02)], [1.5, -2.0, 1.0], 2.0),
    "four, SD estimated": ([(47.0, 15.0), (47.0, 15.02), (47.02, 15.02), (47.02, 15.0)], [2.0, -3.0, 1.0, 2.5],
                           None),
    "two at 25 degrees, known SD (open)": ([(47.0, 15.0), (47.0, 15.0134)], [2.0, -1.0], 10.0),
}


@pytest.mark.parametrize("name", CASES)
def test_region_edge_is_where_the_likelihood_ratio_reaches_its_bound(name):
    st, noise, sd = CASES[name]
    target = (47.02, 15.0067) if "open" in name else TGT
    b = bearings_to(st, target, noise) % 360
    s, L = solve_and_regions(st, b, sd)
    w = np.full(len(st), 1.0 if sd is None else 1.0 / np.radians(sd) ** 2)
    T = reference_threshold(st, b, w, (s.lat[0], s.lon[0]), sd is not None, len(st))
    assert L.threshold[0] == pytest.approx(T, rel=1e-6, abs=1e-9)
    lat, lon = L.ring(0)
    closed = L.radius_m[0] < L.draw_range_m[0] * (1 - 1e-9)
    gap = T - L.s_min[0]
    for la, lo in list(zip(lat[:-1], lon[:-1]))[::3]:
        k = np.argmin(np.abs(lat[:-1] - la) + np.abs(lon[:-1] - lo))
        if closed[k]:
            # the edge is searched to 1e-3 of the gap T - S_min (the radius to about 5e-4)
            assert abs(S_exact(st, b, w, (la, lo)) - T) <= 1.5e-3 * gap
        else:
            assert S_exact(st, b, w, (la, lo)) < T      # an open ray is drawn to the range, still inside
    assert L.bounded[0] == ("open" not in name)
    assert L.star_shaped[0]


def test_region_area_matches_the_geodesic_polygon_area():
    # The area from 32 rays (trapezoid rule on rho^2) against Karney's geodesic polygon area of the same
    # region traced with 720 rays (geographiclib PolygonArea).
    st, noise, sd = CASES["three, known SD"]
    b = bearings_to(st, TGT, noise) % 360
    _, L = solve_and_regions(st, b, sd)
    _, fine = solve_and_regions(st, b, sd, n_rays=720)
    lat, lon = fine.ring(0)
    poly = WGS.Polygon()
    for la, lo in zip(lat[:-1], lon[:-1]):
        poly.AddPoint(la, lo)
    _, _, area = poly.Compute(False, True)
    assert L.area_m2[0] == pytest.approx(abs(area), rel=2e-3)


def test_contains_is_the_exact_criterion():
    st, noise, sd = CASES["three, known SD"]
    b = bearings_to(st, TGT, noise) % 360
    s, L = solve_and_regions(st, b, sd)
    w = np.full(3, 1.0 / np.radians(sd) ** 2)
    T = L.threshold[0]
    rng = np.random.default_rng(4)
    for _ in range(30):
        d = WGS.Direct(s.lat[0], s.lon[0], rng.uniform(0, 360), rng.uniform(0, 2.0 * L.reach_m[0]))
        p = (d["lat2"], d["lon2"])
        assert bool(L.contains(*p)[0]) == (S_exact(st, b, w, p) <= T)


def test_long_baselines_use_geodesic_residuals():
    # A 2000-km network: the plane approximation would be off by ~ rho d / R^2; the region's edge must
    # still satisfy the exact bound with geodesic residuals.
    st = [(48.0, 2.0), (41.0, 12.5), (52.5, 21.0), (60.0, 11.0)]
    b = bearings_to(st, (50.0, 8.0), [1.0, -1.5, 0.8, 2.0]) % 360
    s, L = solve_and_regions(st, b, 2.0)
    w = np.full(4, 1.0 / np.radians(2.0) ** 2)
    lat, lon = L.ring(0)
    vals = [S_exact(st, b, w, p) for p in zip(lat[:-1], lon[:-1])]
    assert vals == pytest.approx([L.threshold[0]] * len(vals), rel=1e-3)


def test_across_the_antimeridian():
    st = [(-17.0, 179.6), (-17.4, -179.5), (-16.5, -179.8)]
    target = (-17.05, 179.95)
    b = bearings_to(st, target, [1.0, -1.0, 0.5]) % 360
    s, L = solve_and_regions(st, b, 2.0)
    assert L.bounded[0] and L.contains(*target)[0]
    lat, lon = L.ring(0)
    assert np.ptp(lon) < 10      # unwrapped: continuous across 180


@pytest.mark.parametrize("dof", [1, 2, 3, 4, 7, 10, 33, 150, 400])
def test_chi_square_tail_matches_scipy(dof):
    x = np.array([0.01, 0.5, 1.0, 3.0, 7.5, 16.0, 40.0, 120.0, 500.0])
    got = regions.chi2_sf(x, dof)
    ref = stats.chi2.sf(x, dof)
    assert got == pytest.approx(ref, rel=1e-6 if dof <= 200 else 2e-2, abs=1e-300)


@pytest.mark.parametrize("dof", [1, 2, 3, 6, 250, 2.0])
def test_chi_square_tail_of_one_value_matches_scipy_and_the_array_answer(dof):
    # one value at a time is remembered between calls: asked twice, in every shape, it still gives scipy's tail,
    # and the same bits as the same value among others in an array
    xs = np.array([0.0, -0.0, 0.3, 2.5, 9.0, 31.0, 300.0])
    whole = regions.chi2_sf(np.concatenate([xs, [1.0]]), dof)[:-1]
    for _ in range(2):
        for k, x in enumerate(xs):
            for got in (regions.chi2_sf(x, dof), regions.chi2_sf(np.array([x]), np.array([dof]))[0],
                        regions.chi2_sf(np.array([[x]]), dof)[0, 0]):
                assert got == pytest.approx(stats.chi2.sf(max(x, 0.0), dof), rel=1e-6 if dof <= 200 else 2e-2)
                assert np.float64(got).tobytes() == whole[k].tobytes()
    assert np.shape(regions.chi2_sf(1.0, dof)) == () and regions.chi2_sf(np.array([[1.0]]), dof).shape == (1, 1)
    assert np.isnan(regions.chi2_sf(np.nan, dof)) and np.isnan(regions.chi2_sf(1.0, 0))


def test_threshold_matches_scipy_quantiles():
    s_min = np.array([0.0, 2.0, 2.0, 5.0])
    known = np.array([True, True, False, False])
    dof = np.array([0, 3, 1, 4])
    got = regions.region_threshold(s_min, known, dof, 0.9)
    ref = [stats.chi2.ppf(0.9, 2), 2.0 + stats.chi2.ppf(0.9, 2), 2.0 * (1 + 2 * stats.f.ppf(0.9, 2, 1) / 1),
           5.0 * (1 + 2 * stats.f.ppf(0.9, 2, 4) / 4)]
    assert got == pytest.approx(ref, rel=1e-9)


def test_threshold_with_an_sd_floor_matches_scipy_quantiles():
    # an estimated SD raised to its floor f: S_min + 2 F(2, dof; level) max(S_min / dof, f^2)
    s_min = np.array([0.0, 1e-6, 2.0, 2.0])
    known = np.array([False, False, False, True])
    dof = np.array([1, 2, 1, 1])
    floor = np.radians([1.0, 1.0, 1.0, 1.0])
    got = regions.region_threshold(s_min, known, dof, 0.95, sd_floor_rad=floor)
    f2 = np.radians(1.0) ** 2
    ref = [2 * stats.f.ppf(0.95, 2, 1) * f2, 1e-6 + 2 * stats.f.ppf(0.95, 2, 2) * f2,
           2.0 * (1 + 2 * stats.f.ppf(0.95, 2, 1)), 2.0 + stats.chi2.ppf(0.95, 2)]
    assert got == pytest.approx(ref, rel=1e-9)


def test_bearings_that_meet_exactly_still_have_a_region():
    # Three bearings through one point leave S_min = 0: without a floor the region would be that point.
    st, _, _ = CASES["three, known SD"]
    b = bearings_to(st, TGT, [0.0, 0.0, 0.0]) % 360
    s, L = solve_and_regions(st, b, sd_floor_deg=np.full(1, 1.0))
    assert L.s_min[0] < 1e-10 and L.bounded[0]
    # the edge lies where S reaches 2 F(2, 1) (1 degree)^2, with geographiclib residuals
    T = 2 * stats.f.ppf(0.95, 2, 1) * np.radians(1.0) ** 2
    assert L.threshold[0] == pytest.approx(T, rel=1e-6)
    lat, lon = L.ring(0)
    vals = [S_exact(st, b, np.ones(3), p) for p in list(zip(lat[:-1], lon[:-1]))[::4]]
    assert vals == pytest.approx([T] * len(vals), rel=2e-3)
    assert L.contains(*TGT)[0]


def test_level_is_checked():
    with pytest.raises(ValueError, match=r"level=0 must be a probability"):
        regions.likelihood_regions([0.0], [0.0], [], [], [], [], [], [], [], [], [True], [0], 0)


def test_regions_that_are_not_star_shaped_are_said_so_and_drawn_as_their_envelope():
    # Fixes with a wild bearing sometimes have a region that a ray leaves and re-enters. Such regions are
    # flagged, and each ray is drawn to its last exit: with geographiclib residuals, S is at the bound there,
    # above it just beyond, and above it somewhere inside along at least one ray (the gap).
    from .simulation import scenario

    sc = scenario(400, 3, 5.0, np.random.default_rng(31), outlier=True)
    n_fix = 400
    g = np.repeat(np.arange(n_fix), 3)
    lat, lon, b = sc["lat"].ravel(), sc["lon"].ravel(), sc["bearing"].ravel()
    s = estimators.solve(lat, lon, b, g, n_fix, np.full(3 * n_fix, 5.0))
    L = regions.likelihood_regions(s.lat, s.lon, g, lat, lon, b, s.range_m, s.azimuth_from_fix_deg, s.residual_deg,
                                   s.region_weight, s.sd_known, s.dof, 0.95, valid=s.converged)
    odd = np.flatnonzero(L.has_region & ~L.star_shaped & L.bounded)
    assert len(odd) >= 1
    i = odd[0]
    st = np.column_stack([sc["lat"][i], sc["lon"][i]])
    w = np.full(3, 1.0 / np.radians(5.0) ** 2)
    T = L.threshold[i]
    psi = np.radians(L.ray_azimuth_deg)

    def S_along(k, rho):
        x = L.centre_x[i] + rho * np.sin(psi[k])
        y = L.centre_y[i] + rho * np.cos(psi[k])
        d = WGS.Direct(L.fix_lat[i], L.fix_lon[i], np.degrees(np.arctan2(x, y)), np.hypot(x, y))
        return S_exact(st, sc["bearing"][i], w, (d["lat2"], d["lon2"]))

    gaps = 0
    for k in range(len(psi)):
        rho = L.radius_m[i, k]
        assert abs(S_along(k, rho) - T) <= 1.5e-3 * (T - L.s_min[i])
        assert S_along(k, rho * 1.01) > T
        gaps += any(S_along(k, f * rho) > T for f in np.linspace(0.05, 0.95, 19))
    assert gaps >= 1


@pytest.mark.parametrize("n, sd", [(4, 4.0), (3, 4.0), (5, None), (2, 6.0)])
def test_radii_are_the_roots_of_the_plane_statistic(n, sd):
    # The search's promise, ray by ray: each radius within 5e-4 of the root of S(rho) = T that scipy's brentq
    # finds on the same plane S. The plane is rebuilt here from the inputs alone (stations at the geodesic
    # distance and azimuth from the fix, each bearing's direction there the residual plus the back azimuth),
    # S's minimum by scipy.optimize.minimize and the bound from scipy.stats (Beale 1960).
    st, b = _fixes_around(np.random.default_rng(11 + n), n, 25)
    check_radii_against_brentq(st, b, sd)


def _fixes_around(rng, n, m):
    """``m`` invented fixes of ``n`` stations 400-2000 m around (47, 15) (geographiclib's direct problem), spread
    round it, and their bearings to it with SD-4° noise."""
    st = []
    for _ in range(m):
        az = rng.uniform(0, 360) + np.arange(n) * 360.0 / n + rng.normal(0, 15, n)
        dist = rng.uniform(400, 2000, n)
        st.append([(d["lat2"], d["lon2"]) for d in (WGS.Direct(47.0, 15.0, a, r) for a, r in zip(az, dist))])
    st = np.asarray(st)
    return st, np.array([bearings_to(s, (47.0, 15.0), rng.normal(0, 4.0, n)) % 360 for s in st])


def test_radii_are_the_roots_with_the_fixes_bearings_interleaved():
    # The same check with the bearings handed over in a random order, not grouped by fix.
    st, b = _fixes_around(np.random.default_rng(5), 4, 25)
    check_radii_against_brentq(st, b, 4.0, shuffle=np.random.default_rng(6))


def season_fixes(rows, n_fix=100_000, k=4):
    """Stations and bearings of some fixes of an invented season: N fixes around central Europe, k stations each
    400-2000 m away, 4 degree noise (pyproj geodesics). Some of these regions reach past a station's distance."""
    import pyproj

    geod = pyproj.Geod(ellps="WGS84")
    rng = np.random.default_rng(1)
    lat0 = rng.uniform(46.0, 49.0, n_fix)
    lon0 = rng.uniform(9.0, 17.0, n_fix)
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(k) * 360.0 / k + rng.normal(0, 20, (n_fix, k))
    dist = rng.uniform(400, 2000, (n_fix, k))
    noise = rng.normal(0, 4.0, n_fix * k).reshape(n_fix, k)
    rows = np.asarray(rows)
    lon_s, lat_s, back = geod.fwd(np.repeat(lon0[rows], k), np.repeat(lat0[rows], k), ang[rows].ravel(),
                                  dist[rows].ravel())
    st = np.stack([np.reshape(lat_s, (-1, k)), np.reshape(lon_s, (-1, k))], axis=2)
    return st, (np.reshape(back, (-1, k)) + noise[rows]) % 360


# fixes whose rays were settled by the search's polynomial models up to 1e-2 of the radius off the root
FAR_REACHING = [20531, 5915, 47240, 56472, 59949, 9948, 1910, 81553, 50079, 59451, 72420, 90002, 63101, 27502,
                14980, 9762, 28343]


@pytest.mark.parametrize("sd", [None, 4.0])
def test_radii_are_the_roots_where_the_region_reaches_past_a_station(sd):
    st, b = season_fixes(FAR_REACHING)
    check_radii_against_brentq(st, b, sd)


def check_radii_against_brentq(st, b, sd, shuffle=None):
    """``shuffle``: a generator to hand the bearings to the regions in a random order (fixes interleaved)."""
    m, n = b.shape
    g = np.repeat(np.arange(m), n)
    sol = estimators.solve(st[:, :, 0].ravel(), st[:, :, 1].ravel(), b.ravel(), g, m,
                           None if sd is None else np.full(m * n, sd))
    p = np.arange(m * n) if shuffle is None else shuffle.permutation(m * n)
    L = regions.likelihood_regions(sol.lat, sol.lon, g[p], st[:, :, 0].ravel()[p], st[:, :, 1].ravel()[p],
                                   b.ravel()[p], sol.range_m[p], sol.azimuth_from_fix_deg[p], sol.residual_deg[p],
                                   sol.region_weight[p], sol.sd_known, sol.dof, 0.95, valid=sol.converged)
    az = np.radians(sol.azimuth_from_fix_deg).reshape(m, n)
    d = sol.range_m.reshape(m, n)
    phi = np.radians(sol.residual_deg).reshape(m, n) + az + np.pi
    sx, sy = d * np.sin(az), d * np.cos(az)
    w = sol.region_weight.reshape(m, n)
    psi = np.radians(L.ray_azimuth_deg)
    checked = errors = 0
    for i in np.flatnonzero(L.has_region):
        def S(p):
            r = (phi[i] - np.arctan2(p[0] - sx[i], p[1] - sy[i]) + np.pi) % (2 * np.pi) - np.pi
            return float(np.sum(w[i] * r * r))

        best = optimize.minimize(S, [0.0, 0.0], method="BFGS", options={"gtol": 1e-12})
        s_min = min(best.fun, S([L.centre_x[i], L.centre_y[i]]))
        if sd is None:
            T = s_min * (1 + 2 * stats.f.ppf(0.95, 2, n - 2) / (n - 2))
        else:
            T = s_min + stats.chi2.ppf(0.95, 2)
        assert L.threshold[i] == pytest.approx(T, rel=1e-6, abs=1e-9)
        for k in np.flatnonzero(L.radius_m[i] < L.draw_range_m[i] * (1 - 1e-9)):
            u = np.array([np.sin(psi[k]), np.cos(psi[k])])
            c = np.array([L.centre_x[i], L.centre_y[i]])
            rho = L.radius_m[i, k]
            lo, hi = 0.7 * rho, 1.3 * rho
            if not S(c + lo * u) < T < S(c + hi * u):
                continue
            root = optimize.brentq(lambda x: S(c + x * u) - T, lo, hi, xtol=1e-9, rtol=1e-13)
            checked += 1
            errors += abs(rho - root) > 5e-4 * root
    assert checked >= 0.9 * len(psi) * L.has_region.sum() > 0
    assert errors == 0


def test_taylor_coefficients_of_the_statistic_along_a_ray_match_scipy():
    # The first guess's series: S's Taylor coefficients s_2 .. s_6 along each ray from a point, against
    # scipy.interpolate.approximate_taylor_polynomial of the plane S computed here with numpy's arctan2.
    from scipy.interpolate import approximate_taylor_polynomial

    rng = np.random.default_rng(5)
    M, n = 3, 4
    sx, sy = rng.uniform(-1500, 1500, (M, n)), rng.uniform(-1500, 1500, (M, n))
    phi, v = rng.uniform(0, 2 * np.pi, (M, n)), rng.uniform(0.5, 2.0, (M, n))
    cx, cy = rng.uniform(-40, 40, M), rng.uniform(-40, 40, M)
    psi = np.arange(8) * np.pi / 4
    ax, ay = (cx[:, None] - sx).T, (cy[:, None] - sy).T
    sp, cp = np.sin(phi).T, np.cos(phi).T
    s, dist = regions._taylor(sp * ay - cp * ax, sp * ax + cp * ay, ax, ay, v.T, psi, 6)
    assert dist == pytest.approx(np.hypot(cx[:, None] - sx, cy[:, None] - sy).min(axis=1), rel=1e-12)
    for i in range(M):
        for k, p in enumerate(psi):
            def S(rho):
                x, y = cx[i] + rho * np.sin(p) - sx[i][:, None], cy[i] + rho * np.cos(p) - sy[i][:, None]
                r = (phi[i][:, None] - np.arctan2(x, y) + np.pi) % (2 * np.pi) - np.pi
                return (v[i][:, None] * r * r).sum(0)

            scale = 0.05 * dist[i]
            ref = approximate_taylor_polynomial(S, 0.0, 6, scale, order=14).coeffs[::-1]    # ref[j]: rho^j
            # compared on the scale of the series' radius of convergence: s_j dist^j
            size = max(abs(ref[j]) * dist[i] ** j for j in (1, 2, 3, 4))
            for order in (2, 3, 4):
                unit = dist[i] ** order
                assert s[order - 2, i, k] * unit == pytest.approx(ref[order] * unit, rel=1e-4, abs=1e-5 * size)


@pytest.mark.parametrize("n", range(1, 11))
def test_bearing_sums_add_as_numpy_sum_does(n):
    # The fast per-fix sum over bearings must give numpy's own x.sum(1) bit for bit (the regions' answers are
    # compared between versions bit for bit); terms of mixed sizes make the order of the additions show.
    rng = np.random.default_rng(n)
    for M in (1, 2, 3, 7, 8, 100, 5000):
        x = rng.normal(size=(M, n)) * rng.choice([1.0, 1e8, 1e-8], size=(M, n))
        assert np.array_equal(regions._bearing_sum(x), x.sum(1))


def _random_rays(rng, M=40, n=4, K=16, unweighted=False):
    sx, sy = rng.uniform(-1500, 1500, (M, n)), rng.uniform(-1500, 1500, (M, n))
    phi, v = rng.uniform(0, 2 * np.pi, (M, n)), rng.uniform(0.5, 2.0, (M, n))
    if unweighted:
        v[:, 0] = 0.0
    cx, cy = rng.uniform(-40, 40, M), rng.uniform(-40, 40, M)
    T = rng.uniform(1.0, 10.0, M)
    psi = np.arange(K) * (2 * np.pi / K)
    rays = regions._Rays((np.sin(phi), np.cos(phi)), sx, sy, v, cx, cy, T, psi)
    return rays, (sx, sy, phi, v, cx, cy, T, psi)


@pytest.mark.parametrize("unweighted", [False, True])
def test_statistic_along_rays_matches_arctan2_and_both_evaluations_agree(unweighted):
    # f = S - T along every ray against S written here with numpy's arctan2 (wrapped residuals); its slope against
    # a central difference; and the evaluation of every ray at once against the one of gathered rays, bit for bit
    # (the search uses one or the other depending on how many rays are left).
    rng = np.random.default_rng(11)
    rays, (sx, sy, phi, v, cx, cy, T, psi) = _random_rays(rng, unweighted=unweighted)
    M, K = len(cx), len(psi)
    rho = rng.uniform(1.0, 300.0, M * K)

    def S(r):
        rr = r.reshape(M, K)
        x = cx[:, None, None] + rr[:, None, :] * np.sin(psi) - sx[:, :, None]
        y = cy[:, None, None] + rr[:, None, :] * np.cos(psi) - sy[:, :, None]
        res = (phi[:, :, None] - np.arctan2(x, y) + np.pi) % (2 * np.pi) - np.pi
        return ((v[:, :, None] * res * res).sum(1) - T[:, None]).ravel()

    f, df, safe = rays.f(rho)
    assert f == pytest.approx(S(rho), rel=1e-9, abs=1e-9)
    h = 1e-4
    assert df == pytest.approx((S(rho + h) - S(rho - h)) / (2 * h), rel=1e-5, abs=1e-7)
    # no residual wraps within the bound: the residuals move by less than pi, so S is smooth out to it
    assert (safe > 0).all()
    every = np.arange(M * K)
    for mine, gathered in zip((f, df, safe), rays.f(rho, every)):
        assert np.array_equal(mine, gathered)
    some = every[::3]
    assert np.array_equal(rays.f(rho[some], some, slope=False), f[some])


def test_the_bound_without_arctan_never_claims_a_point_outside_that_is_inside():
    # above() says S > T from sin^2 r <= r^2; wherever it says so, S written with arctan2 must exceed T.
    rng = np.random.default_rng(12)
    rays, (sx, sy, phi, v, cx, cy, T, psi) = _random_rays(rng, M=60)
    M, K = len(cx), len(psi)
    rho = rng.uniform(1.0, 3000.0, M * K)
    rr = rho.reshape(M, K)
    x = cx[:, None, None] + rr[:, None, :] * np.sin(psi) - sx[:, :, None]
    y = cy[:, None, None] + rr[:, None, :] * np.cos(psi) - sy[:, :, None]
    res = (phi[:, :, None] - np.arctan2(x, y) + np.pi) % (2 * np.pi) - np.pi
    s = (v[:, :, None] * res * res).sum(1).ravel()
    above = rays.above(rho)
    assert above.any() and not above.all()
    assert (s[above] > np.repeat(T, K)[above]).all()


def test_rays_searched_on_in_a_pool_end_where_one_search_to_the_end_would(monkeypatch):
    # Rays not settled after POOL_AFTER steps are set aside and searched on with other batches' (each ray's steps
    # are its own): the regions must be bit for bit those of searching every batch to the end, whatever the batches.
    # (season_fixes' 400 fixes pool six batches of 60 into one resumed search: the row and ray offsets are used)
    m, n = 400, 4
    st, b = season_fixes(range(m), n_fix=m, k=n)
    g = np.repeat(np.arange(m), n)
    sol = estimators.solve(st[:, :, 0].ravel(), st[:, :, 1].ravel(), b.ravel(), g, m, np.full(m * n, 5.0))

    def run(chunk):
        return regions.likelihood_regions(sol.lat, sol.lon, g, st[:, :, 0].ravel(), st[:, :, 1].ravel(), b.ravel(),
                                          sol.range_m, sol.azimuth_from_fix_deg, sol.residual_deg, sol.region_weight,
                                          sol.sd_known, sol.dof, 0.95, valid=sol.converged, chunk=chunk)

    pooled = [run(chunk) for chunk in (60, 1000)]
    monkeypatch.setattr(regions, "POOL_AFTER", 60)         # never set aside: one search to the end per batch
    whole = run(1000)
    assert whole.has_region.sum() > 0.9 * m
    for L in pooled:
        for name in ("radius_m", "centre_x", "centre_y", "bounded", "star_shaped", "area_m2", "reach_m"):
            assert np.array_equal(getattr(L, name), getattr(whole, name), equal_nan=True), name


def test_the_limit_far_out_looks_at_every_ray_whose_sine_bound_is_below_the_threshold():
    # S far out along a direction psi tends to sum v wrap(phi - psi)^2. Its least value is taken over the bearings'
    # mean direction and, for a fix where sum v sin^2(phi - psi) falls below T on some ray, over every ray; the
    # module skips the rays' sums where a bound shows none can. Checked against those sums written here with numpy's
    # sin (nearly parallel bearings make the sine sums small, spread ones large).
    rng = np.random.default_rng(21)
    M, n, K = 400, 3, 16
    spread = rng.choice([1e-3, 0.03, 0.1, 0.3, 2.0], size=(M, 1))
    phi = rng.uniform(0, 2 * np.pi, (M, 1)) + rng.normal(0, 1, (M, n)) * spread
    v = rng.uniform(0.5, 2.0, (M, n))
    sx, sy = rng.uniform(-1500, 1500, (M, n)), rng.uniform(-1500, 1500, (M, n))
    cx, cy = rng.uniform(-40, 40, M), rng.uniform(-40, 40, M)
    T = rng.uniform(0.001, 3.0, M)
    psi = np.arange(K) * (2 * np.pi / K)
    trig = (np.sin(phi), np.cos(phi))
    rays = regions._Rays(trig, sx, sy, v, cx, cy, T, psi)
    got = regions._s_at_infinity(rays, trig, phi, v, psi, T)

    def wrap(a):
        return (a + np.pi) % (2 * np.pi) - np.pi

    mean = np.arctan2((v * np.sin(phi)).sum(1), (v * np.cos(phi)).sum(1))
    at_mean = (v * wrap(phi - mean[:, None]) ** 2).sum(1)
    sines = (v[:, :, None] * np.sin(phi[:, :, None] - psi) ** 2).sum(1).min(1)
    at_rays = (v[:, :, None] * wrap(phi[:, :, None] - psi) ** 2).sum(1).min(1)
    clear = np.abs(sines - T) > 1e-9 * T          # fixes whose sine sum is not within rounding of T
    low = (sines < T) & (at_mean >= T)
    want = np.where(low, np.minimum(at_mean, at_rays), at_mean)
    assert clear.mean() > 0.99
    assert low[clear].sum() > 20 and (~low & (at_mean >= T))[clear].sum() > 20       # both cases are met
    assert (at_rays < at_mean)[low & clear].any()                                   # a ray's limit is the least
    assert got[clear] == pytest.approx(want[clear], rel=1e-12)


@pytest.mark.parametrize("n", [2, 3, 4, 6])
def test_the_bound_without_arctan_is_the_sum_over_every_bearing(n):
    # above() stops adding bearings' terms on rays whose first ones already exceed T (a sum of non-negative terms
    # only grows): its answer must be that of the whole sum, written here with numpy's sin and cos, wherever that
    # sum is not within rounding of T; rays that exceed T only with the later bearings must be among them.
    rng = np.random.default_rng(30 + n)
    rays, (sx, sy, phi, v, cx, cy, T, psi) = _random_rays(rng, M=80, n=n)
    M, K = len(cx), len(psi)
    rho = rng.uniform(1.0, 3000.0, M * K)
    rr = rho.reshape(M, K)
    dx = cx[:, None, None] + rr[:, None, :] * np.sin(psi) - sx[:, :, None]
    dy = cy[:, None, None] + rr[:, None, :] * np.cos(psi) - sy[:, :, None]
    across = np.sin(phi)[:, :, None] * dy - np.cos(phi)[:, :, None] * dx
    terms = v[:, :, None] * across**2 / (dx**2 + dy**2)               # v sin^2 r, (M, n, K)
    whole = terms.sum(1).ravel()
    first_two = terms[:, :2].sum(1).ravel()
    Tr = np.repeat(T, K)
    clear = np.abs(whole - Tr) > 1e-9 * Tr
    got = rays.above(rho)
    assert clear.mean() > 0.99
    assert got.any() and not got.all()
    if n > 2:
        assert ((first_two <= Tr) & (whole > Tr) & clear).sum() > 10
    assert np.array_equal(got[clear], (whole > Tr)[clear])
