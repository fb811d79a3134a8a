"""Fixes against outside references: geographiclib geodesics, Karney's published intersection, scipy."""

import importlib

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from scipy import optimize, stats

from dfkit import estimators, regions

WGS = Geodesic.WGS84


def exact_bearings(stations, target):
    """Noise-free true bearings from stations to a target, by geographiclib (Karney 2013)."""
    return np.array([WGS.Inverse(la, lo, target[0], target[1])["azi1"] % 360 for la, lo in stations])


def one_fix(stations, bearings, **kw):
    st = np.asarray(stations, float)
    return estimators.solve(st[:, 0], st[:, 1], bearings, np.zeros(len(st), int), 1, **kw)


GEOMETRIES = {
    "200 m hunt": ([(47.0, 15.0), (47.0, 15.0027), (47.0015, 15.0030)], (47.0012, 15.0011)),
    "2000 km HF network": ([(48.0, 2.0), (41.0, 12.5), (52.5, 21.0), (60.0, 11.0)], (50.0, 8.0)),
    "across the antimeridian": ([(-17.0, 179.6), (-17.4, -179.5), (-16.5, -179.8)], (-17.05, 179.95)),
    "near the north pole": ([(89.5, 0.0), (89.5, 120.0), (89.6, -110.0)], (89.9, 45.0)),
    "near the south pole": ([(-88.0, 10.0), (-88.5, 150.0)], (-89.2, 80.0)),
}


@pytest.mark.parametrize("name", GEOMETRIES)
@pytest.mark.parametrize("method", estimators.METHODS)
def test_noise_free_bearings_give_the_exact_point(name, method):
    stations, target = GEOMETRIES[name]
    b = exact_bearings(stations, target)
    s = one_fix(stations, b, method=method, sd_deg=np.full(len(b), 2.0))
    err = WGS.Inverse(target[0], target[1], s.lat[0], s.lon[0])["s12"]
    assert s.converged[0]
    assert err < 1e-3        # metres, whatever the baseline
    assert np.abs(s.residual_deg).max() < 1e-6


def test_karney_published_geodesic_intersection():
    # GeographicLib IntersectTool man page, EXAMPLES (Karney 2024, J. Surv. Eng. 150(3) 04024005):
    # geodesic X from 50N 4W at azimuth -147.7 meets the equator at (0, -29.74549), 6058049 m along X.
    # As bearings: station X at (50, -4) bearing 212.3; station Y on the equator at 60W bearing 90.
    s = one_fix([(50.0, -4.0), (0.0, -60.0)], np.array([212.3, 90.0]))
    assert s.lat[0] == pytest.approx(0.0, abs=5e-6)
    assert s.lon[0] == pytest.approx(-29.74549, abs=5e-6)
    assert WGS.Inverse(50.0, -4.0, s.lat[0], s.lon[0])["s12"] == pytest.approx(6058049, abs=1.0)


def test_mle_agrees_with_a_general_optimiser_on_geodesic_residuals():
    # Lenth (1981) MLE maximises sum cos(residual); do that with scipy's Nelder-Mead on geographiclib azimuths.
    stations = [(47.0, 15.0), (47.0, 15.013), (47.013, 15.016), (47.014, 14.996)]
    obs = exact_bearings(stations, (47.008, 15.005)) + np.array([2.0, -3.0, 1.5, -1.0])
    s = one_fix(stations, obs, method="mle")

    def negll(p):
        az = exact_bearings(stations, p)
        return -np.sum(np.cos(np.radians(obs - az)))

    ref = optimize.minimize(negll, [47.007, 15.004], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.01


def _plane_example():
    """Four stations about 1-2 km apart on the equator (plane metres east/north of 0N 0E) and their bearings.

    The stations are placed with geographiclib's direct problem; on the equator over 2 km a local plane
    and the ellipsoid differ by far less than the tolerances below (directions by ~1e-7 rad).
    """
    xs = np.array([0, 1000, 1200, -300.0])
    ys = np.array([0, 0, 1500, 1600.0])
    pts = [WGS.Direct(0.0, 0.0, np.degrees(np.arctan2(x, y)), np.hypot(x, y)) for x, y in zip(xs, ys)]
    st = np.array([(p["lat2"], p["lon2"]) if np.hypot(x, y) > 0 else (0.0, 0.0) for p, x, y in zip(pts, xs, ys)])
    return st, np.array([26.0, 323.3, 234.6, 134.0])


def _plane_xy(lat, lon):
    """East/north metres from 0N 0E by geographiclib (azimuthal equidistant about the origin)."""
    inv = [WGS.Inverse(0.0, 0.0, a, b) for a, b in zip(np.atleast_1d(lat), np.atleast_1d(lon))]
    return (np.array([i["s12"] * np.sin(np.radians(i["azi1"])) for i in inv]),
            np.array([i["s12"] * np.cos(np.radians(i["azi1"])) for i in inv]))


def _planar_reference(stations, bearings, weights_of_range=None, iterations=200):
    """Least squares on perpendicular distances to the bearing lines in the plane, written out here:
    minimise sum v_i (n_i . (P - S_i))^2, n_i = (cos b_i, -sin b_i); with ``weights_of_range`` the weights
    v_i = 1 / d_i(P)^2 are recomputed from the current point until it stops moving (Stansfield 1947)."""
    sx, sy = _plane_xy(stations[:, 0], stations[:, 1])
    b = np.radians(bearings)
    n = np.column_stack([np.cos(b), -np.sin(b)])
    c = n[:, 0] * sx + n[:, 1] * sy
    P = np.zeros(2)
    v = np.ones(len(b))
    for _ in range(iterations if weights_of_range else 1):
        A = (n * v[:, None]).T @ n
        P_new = np.linalg.solve(A, (n * v[:, None]).T @ c)
        if weights_of_range:
            v = 1.0 / ((P_new[0] - sx) ** 2 + (P_new[1] - sy) ** 2)
        if np.hypot(*(P_new - P)) < 1e-9:
            P = P_new
            break
        P = P_new
    return P


@pytest.mark.parametrize("method", ["lsq", "stansfield"])
def test_least_squares_methods_match_a_planar_reference(method):
    st, b = _plane_example()
    s = one_fix(st, b, method=method, sd_deg=np.full(4, 2.0))
    x, y = _plane_xy(s.lat, s.lon)
    ref = _planar_reference(st, b, weights_of_range=(method == "stansfield"))
    assert (x[0], y[0]) == pytest.approx(tuple(ref), abs=0.02)


def test_mle_on_the_plane_example_matches_nelder_mead():
    # Lenth (1981): maximise sum cos(residual); done here by scipy's Nelder-Mead on geographiclib azimuths.
    st, b = _plane_example()
    s = one_fix(st, b, method="mle")

    def negll(p):
        return -np.sum(np.cos(np.radians(b - exact_bearings(st, p))))

    ref = optimize.minimize(negll, [0.008, 0.0035], method="Nelder-Mead",
                            options={"xatol": 1e-11, "fatol": 1e-15, "maxiter": 5000}).x
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.01


def test_covariance_is_the_inverse_fisher_information():
    # Cramer-Rao bound (Stansfield 1947; D. J. Torrieri, "Statistical theory of passive location systems",
    # IEEE Trans. AES 20(2), 183-198, 1984 [from memory]): J = sum u u^T / (d sigma)^2, u perpendicular to the
    # line of sight station -> fix; computed here directly from the geometry with geographiclib.
    st, b = _plane_example()
    s = one_fix(st, b, method="stansfield", sd_deg=np.full(4, 2.0))
    J = np.zeros((2, 2))
    for la, lo in st:
        inv = WGS.Inverse(la, lo, s.lat[0], s.lon[0])
        a = np.radians(inv["azi1"])
        u = np.array([np.cos(a), -np.sin(a)])
        J += np.outer(u, u) / (inv["s12"] * np.radians(2.0)) ** 2
    assert s.cov_en[0] == pytest.approx(np.linalg.inv(J), rel=1e-4)


def test_least_squares_covariance_is_the_sandwich():
    # Unweighted least squares on perpendicular distances p_i ~ d_i * angular error: its covariance is
    # (A^T A)^-1 A^T S A (A^T A)^-1 with rows A_i = u_i^T (the unit normal to the line of sight) and
    # S = diag(d_i^2 sigma_i^2) (H. White, Econometrica 48(4), 817-838, 1980 [from memory]; any regression
    # text). Computed here with numpy from geographiclib distances and azimuths, unequal SDs.
    st, b = _plane_example()
    sd = np.array([1.0, 2.0, 3.0, 4.0])
    s = one_fix(st, b, method="lsq", sd_deg=sd)
    A, d = [], []
    for la, lo in st:
        inv = WGS.Inverse(la, lo, s.lat[0], s.lon[0])
        a = np.radians(inv["azi1"])
        A.append([np.cos(a), -np.sin(a)])
        d.append(inv["s12"])
    A = np.array(A)
    Sig = np.diag((np.array(d) * np.radians(sd)) ** 2)
    Ai = np.linalg.inv(A.T @ A)
    assert s.cov_en[0] == pytest.approx(Ai @ A.T @ Sig @ A @ Ai, rel=1e-4)
    fisher = one_fix(st, b, method="stansfield", sd_deg=sd).cov_en[0]
    assert np.linalg.det(s.cov_en[0]) > np.linalg.det(fisher)     # never better than the Cramer-Rao bound


def test_estimated_sd_uses_n_minus_2_degrees_of_freedom():
    st, b = _plane_example()
    s = one_fix(st, b, method="mle")
    r = s.residual_deg
    assert s.sd_deg[0] == pytest.approx(np.sqrt(np.sum(r**2) / (4 - 2)))
    assert not s.sd_known[0] and s.dof[0] == 2


def test_an_estimated_sd_is_never_below_its_floor():
    # Bearings that meet almost exactly: the estimate from the residuals is tiny, the SD used is the floor, and
    # the covariance is the inverse information (sum g g^T)^-1 (Stansfield 1947) scaled by the floor squared.
    st, _ = _plane_example()
    target = (WGS.Direct(0.0, 0.0, 30.0, 900.0)["lat2"], WGS.Direct(0.0, 0.0, 30.0, 900.0)["lon2"])
    b = np.array([WGS.Inverse(a, c, *target)["azi1"] % 360 for a, c in st]) + [0.001, -0.002, 0.0, 0.001]
    free = one_fix(st, b, method="mle")
    held = one_fix(st, b, method="mle", sd_floor_deg=np.full(4, 0.5))
    assert free.sd_deg[0] < 0.01 and held.sd_deg[0] == pytest.approx(0.5)
    assert held.sd_estimate_deg[0] == pytest.approx(free.sd_deg[0])
    assert held.sd_floor_deg[0] == 0.5 and held.lat[0] == free.lat[0] and held.lon[0] == free.lon[0]
    g = []
    for (a, c) in st:
        inv = WGS.Inverse(held.lat[0], held.lon[0], a, c)
        t = np.radians(inv["azi1"])
        g.append([np.cos(t) / inv["s12"], -np.sin(t) / inv["s12"]])     # d(predicted bearing)/d(east, north)
    g = np.array(g)
    assert held.cov_en[0] == pytest.approx(np.linalg.inv(g.T @ g) * np.radians(0.5) ** 2, rel=1e-4)
    # a floor below the estimate changes nothing; a known SD is used as given, whatever the floor
    loose = one_fix(st, b + [1.0, -2.0, 0.5, 1.5], method="mle", sd_floor_deg=np.full(4, 0.5))
    assert loose.sd_deg[0] == pytest.approx(loose.sd_estimate_deg[0]) and loose.sd_deg[0] > 0.5
    known = one_fix(st, b, method="mle", sd_deg=np.full(4, 0.2), sd_floor_deg=np.full(4, 0.5))
    assert known.sd_deg[0] == pytest.approx(0.2) and known.sd_floor_deg[0] == 0


def test_robust_andrews_ignores_a_wild_bearing_and_huber_reduces_it():
    st, b = _plane_example()
    d5 = WGS.Direct(0.0, 0.0, np.degrees(np.arctan2(800.0, -600.0)), 1000.0)     # 800 m east, 600 m south
    st5 = np.vstack([st, [[d5["lat2"], d5["lon2"]]]])
    b5 = np.append(b, 330.0)
    sd = np.full(5, 2.0)
    mle = one_fix(st5, b5, method="mle")
    hub = one_fix(st5, b5, method="huber", sd_deg=sd)
    andr = one_fix(st5, b5, method="andrews", sd_deg=sd)
    four = one_fix(st, b, method="andrews", sd_deg=sd[:4])
    assert andr.weight[4] == 0.0
    # with the wild bearing at zero weight, Andrews is the same fix as without it
    assert WGS.Inverse(andr.lat[0], andr.lon[0], four.lat[0], four.lon[0])["s12"] < 1e-3
    t = WGS.Direct(0.0, 0.0, np.degrees(np.arctan2(400.0, 900.0)), np.hypot(400.0, 900.0))
    truth = (t["lat2"], t["lon2"])       # the point the example's bearings were drawn from (400 m E, 900 m N)
    dist = lambda s: WGS.Inverse(truth[0], truth[1], s.lat[0], s.lon[0])["s12"]  # noqa: E731
    assert dist(andr) < dist(hub) < dist(mle)
    assert 0 < hub.weight[4] < 1


def test_huber_equals_mle_without_outliers():
    st, b = _plane_example()
    m = one_fix(st, b, method="mle", sd_deg=np.full(4, 5.0))
    h = one_fix(st, b, method="huber", sd_deg=np.full(4, 5.0))
    assert (h.weight == 1).all()
    assert WGS.Inverse(m.lat[0], m.lon[0], h.lat[0], h.lon[0])["s12"] < 1e-3


def test_many_fixes_at_once_equal_one_by_one():
    rng = np.random.default_rng(3)
    stations, bearings, groups, singles = [], [], [], []
    for k in range(20):
        tgt = (46 + rng.uniform(0, 2), 14 + rng.uniform(0, 2))
        st = [(tgt[0] + rng.uniform(-0.02, 0.02), tgt[1] + rng.uniform(-0.03, 0.03)) for _ in range(3 + k % 3)]
        b = exact_bearings(st, tgt) + rng.normal(0, 3, len(st))
        stations += st
        bearings += list(b)
        groups += [k] * len(st)
        singles.append(one_fix(st, b))
    st = np.array(stations)
    s = estimators.solve(st[:, 0], st[:, 1], bearings, groups, 20)
    for k, one in enumerate(singles):
        assert WGS.Inverse(one.lat[0], one.lon[0], s.lat[k], s.lon[k])["s12"] < 1e-3


@pytest.mark.parametrize("p", [0.50, 0.90, 0.95, 0.99])
def test_chi_square_scale_factor(p):
    # k = sqrt(chi2_2(p)) (bivariate normal; Stansfield 1947), against scipy.stats.chi2 and the closed form
    # sqrt(-2 ln(1-p)) of the chi-square distribution with 2 degrees of freedom.
    assert regions.scale_factor(p) == pytest.approx(np.sqrt(stats.chi2.ppf(p, 2)), rel=1e-9)
    assert regions.scale_factor(p) == pytest.approx(np.sqrt(-2 * np.log(1 - p)), rel=1e-12)


@pytest.mark.parametrize("n", [3, 4, 5, 6, 10, 50])
def test_f_scale_factor(n):
    # k = sqrt(2 F(0.95; 2, n-2)) for an SD estimated from the fix (joint confidence region of a
    # regression), against scipy.stats.f.
    m = n - 2
    assert regions.scale_factor(0.95, [m])[0] == pytest.approx(np.sqrt(2 * stats.f.ppf(0.95, 2, m)), rel=1e-9)


def test_ellipse_axes_closed_form():
    # A diagonal covariance 100^2 east, 50^2 north: major axis east (azimuth 90), semi-axes k*100 and k*50.
    e = regions.ellipse_axes(np.diag([100.0**2, 50.0**2])[None], 2.0)
    assert (e.semi_major_m[0], e.semi_minor_m[0], e.orientation_deg[0]) == pytest.approx((200, 100, 90))
    assert e.area_m2[0] == pytest.approx(np.pi * 200 * 100)
    e = regions.ellipse_axes(np.array([[[1.0, 0.9], [0.9, 1.0]]]), 1.0)   # NE-SW elongation
    assert e.orientation_deg[0] == pytest.approx(45.0)


def test_error_polygon_of_three_lines_contains_their_crossing():
    st = [(47.0, 15.0), (47.0, 15.013), (47.013, 15.016)]
    tgt = (47.006, 15.007)
    b = exact_bearings(st, tgt)
    ring = regions.error_polygon([p[0] for p in st], [p[1] for p in st], b, 2.0, *tgt)
    from shapely.geometry import Point, Polygon

    assert Polygon(np.column_stack([ring[1], ring[0]])).contains(Point(tgt[1], tgt[0]))
    assert regions.error_polygon([47.0, 47.0], [15.0, 15.01], [0.0, 0.0], 1.0, 47.01, 15.0) is None


def test_lenth_iteration_does_not_settle_into_a_two_cycle():
    # A benchmark fix on which the plain fixed-point step alternated between two points 273 m apart;
    # the MLE must agree with a general optimiser (scipy Nelder-Mead on geographiclib azimuths).
    st = [(47.355029, 13.635625), (47.366142, 13.618487), (47.377346, 13.647251), (47.375887, 13.657846)]
    obs = np.array([16.05, 71.91, 223.32, 234.24])
    s = one_fix(st, obs, sd_deg=np.full(4, 4.0))

    def negll(p):
        return -np.sum(np.cos(np.radians(obs - exact_bearings(st, p))))

    ref = optimize.minimize(negll, [47.37, 13.64], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
    assert s.converged[0]
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.01


@pytest.mark.parametrize("sd", [2.0, 5.0, 10.0, 20.0, 30.0])
def test_kappa_matches_the_wrapped_normal_moment(sd):
    # A(kappa) = I1(kappa)/I0(kappa) = exp(-sigma^2/2) (wrapped-normal moment matching), solved here with
    # scipy's Bessel functions and brentq; Best & Fisher's approximation is within 0.7 % of it (their
    # stated accuracy is of that order; N. I. Fisher 1993, sec. 4.5 [from memory]).
    from scipy.special import i0e, i1e

    target = np.exp(-np.radians(sd) ** 2 / 2)
    exact = optimize.brentq(lambda k: i1e(k) / i0e(k) - target, 1e-6, 1e7)
    assert estimators.kappa_from_sd(sd) == pytest.approx(exact, rel=7e-3)


def _negll(stations, obs, p):
    return -np.sum(np.cos(np.radians(obs - exact_bearings(stations, p))))


def test_every_verified_optimum_is_a_local_optimum_for_an_outside_optimiser():
    # Fixes with one wild bearing (the hard case): wherever dfkit reports a verified optimum of Lenth's
    # likelihood, scipy's Nelder-Mead on geographiclib azimuths, started 30 m away, finds no better point
    # nearby: it comes back to dfkit's answer.
    from .simulation import scenario

    sc = scenario(12, 5, 3.0, np.random.default_rng(21), outlier=True)
    checked = 0
    for i in range(12):
        st = np.column_stack([sc["lat"][i], sc["lon"][i]])
        s = one_fix(st, sc["bearing"][i], method="mle", sd_deg=np.full(5, 3.0))
        if not s.converged[0]:
            assert estimators.ENDINGS[s.ending[0]] != "optimum"
            continue
        start = WGS.Direct(s.lat[0], s.lon[0], 45.0, 30.0)
        x0 = np.array([start["lat2"], start["lon2"]])
        simplex = np.array([x0, x0 + [3e-4, 0.0], x0 + [0.0, 3e-4]])     # about 30 m across
        ref = optimize.minimize(lambda p: _negll(st, sc["bearing"][i], p), x0, method="Nelder-Mead",
                                options={"xatol": 1e-8, "fatol": 1e-13, "maxiter": 2000,
                                         "initial_simplex": simplex}).x
        assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.05
        checked += 1
    assert checked >= 4


def test_andrews_with_a_known_sd_matches_an_outside_optimiser():
    # Andrews' objective sum rho(2 sin(r/2) / sd), rho(t) = c^2 (1 - cos(t/c)) for |t| < c pi, else 2 c^2,
    # minimised by Nelder-Mead from the fix of the four good bearings: the same point as dfkit's.
    st, b = _plane_example()
    d5 = WGS.Direct(0.0, 0.0, np.degrees(np.arctan2(800.0, -600.0)), 1000.0)
    st5 = np.vstack([st, [[d5["lat2"], d5["lon2"]]]])
    b5 = np.append(b, 330.0)
    c, sd = 1.5, np.radians(2.0)

    def objective(p):
        t = 2 * np.sin(np.radians(b5 - exact_bearings(st5, p)) / 2) / sd
        return np.sum(np.where(np.abs(t) < c * np.pi, c * c * (1 - np.cos(t / c)), 2 * c * c))

    s = one_fix(st5, b5, method="andrews", sd_deg=np.full(5, 2.0), robust_c=c)
    four = one_fix(st, b, method="mle")
    ref = optimize.minimize(objective, [four.lat[0], four.lon[0]], method="Nelder-Mead",
                            options={"xatol": 1e-11, "fatol": 1e-14, "maxiter": 4000}).x
    assert s.converged[0]
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.05


def test_huber_never_drops_a_bearing():
    st, b = _plane_example()
    d5 = WGS.Direct(0.0, 0.0, np.degrees(np.arctan2(800.0, -600.0)), 1000.0)
    st5 = np.vstack([st, [[d5["lat2"], d5["lon2"]]]])
    for sd in (None, np.full(5, 2.0)):
        s = one_fix(st5, np.append(b, 330.0), method="huber", sd_deg=sd)
        assert (s.weight > 0).all()


def test_bad_arguments_name_the_parameter():
    st, b = _plane_example()
    with pytest.raises(ValueError, match=r"sd_deg= must be positive"):
        one_fix(st, b, sd_deg=np.array([1.0, -2.0, 1.0, 1.0]))
    with pytest.raises(ValueError, match=r"bearing_deg= must be finite"):
        one_fix(st, np.array([1.0, np.inf, 3.0, 4.0]))
    with pytest.raises(ValueError, match=r"robust_c=0 must be a positive number"):
        one_fix(st, b, method="andrews", robust_c=0)
    with pytest.raises(ValueError, match=r"method='x' is not one of 'mle', 'huber'"):
        one_fix(st, b, method="x")


# Two fixes of five bearings, one a reflection, on which Stansfield's plain re-weighting crawls (the first) or
# circles (the second) for hundreds of rounds: (station lat, lon, observed true bearing), SD 5 degrees.
STANSFIELD_HARD = [
    [(47.036011, 8.371727, 7.8), (47.034161, 8.362700, 357.0), (47.039122, 8.354902, 89.2),
     (47.044888, 8.354925, 139.9), (47.045321, 8.368119, 208.2)],
    [(47.918189, 7.733815, 141.4), (47.928125, 7.753990, 217.2), (47.910575, 7.757935, 286.3),
     (47.902858, 7.744491, 272.3), (47.913012, 7.731400, 92.5)],
]


@pytest.mark.parametrize("rows", STANSFIELD_HARD)
def test_stansfield_reaches_its_fixed_point_with_a_wild_bearing(rows):
    st = np.array(rows)
    s = one_fix(st[:, :2], st[:, 2], method="stansfield", sd_deg=np.full(len(st), 5.0))
    assert s.converged[0] and s.ending_name(0) == "optimum"
    # Stansfield (1947): the answer is the least-squares point of the bearing lines weighted by 1/(d sigma)^2,
    # with the ranges d from the answer itself. Check it independently in the answer's azimuthal equidistant
    # plane built with geographiclib: station i at distance d_i and azimuth a_i from the answer; its line runs
    # through it in the direction of the station-to-answer direction (a_i + 180) turned by the residual r_i
    # (observed bearing minus the geodesic azimuth from the station to the answer).
    A = np.zeros((2, 2))
    rhs = np.zeros(2)
    for la, lo, th in rows:
        inv = WGS.Inverse(s.lat[0], s.lon[0], la, lo)
        a, d = np.radians(inv["azi1"]), inv["s12"]
        r = np.radians((th - WGS.Inverse(la, lo, s.lat[0], s.lon[0])["azi1"] + 180.0) % 360.0 - 180.0)
        phi = a + np.pi + r
        n = np.array([np.cos(phi), -np.sin(phi)])             # unit normal of the line (x east, y north)
        v = 1.0 / d**2
        A += v * np.outer(n, n)
        rhs += v * n * (n @ (d * np.array([np.sin(a), np.cos(a)])))
    step = np.linalg.solve(A, rhs)                           # the re-weighted point, from the answer [m]
    assert np.hypot(*step) < 0.01


def _five_around(truth, errors_deg, ranges=(900.0, 1400.0, 1100.0, 1600.0, 1000.0)):
    """Five stations around ``truth`` (72 degrees apart), observing it with the given errors (geographiclib)."""
    st, b = [], []
    for k, (err, rng) in enumerate(zip(errors_deg, ranges)):
        d = WGS.Direct(truth[0], truth[1], 10.0 + 72.0 * k, rng)
        st.append((d["lat2"], d["lon2"]))
        b.append((d["azi2"] + 180.0 + err) % 360.0)        # azi2 points away from the truth
    return np.array(st), np.array(b)


def test_andrews_drops_a_wild_bearing_the_others_cannot_test_when_all_together_are_implausible():
    # SD unknown: four bearings a few degrees off and a reflection 60 degrees off. The kept four (2 degrees of
    # freedom) are far too few to prove the fifth wild by an outlier test, but all five together would need an
    # SD far above any directional antenna's: the reflection is dropped and the fix is the four's.
    truth = (47.2, 8.6)
    st, b = _five_around(truth, [3.0, -4.0, 2.0, -3.0, 60.0])
    s = one_fix(st, b, method="andrews")
    assert s.converged[0]
    assert s.weight[4] == 0.0 and (s.weight[:4] > 0).all()

    # Lenth's likelihood of the four good bearings, maximised by scipy on geographiclib azimuths
    def negll(p):
        return -sum(np.cos(np.radians(bb - WGS.Inverse(la, lo, p[0], p[1])["azi1"])) for (la, lo), bb in
                    zip(st[:4], b[:4]))
    ref = optimize.minimize(negll, [truth[0], truth[1]], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 4000}).x
    cov = s.cov_en[0]
    dist = WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"]
    # Andrews' weights of the kept four differ a little from 1: the fix is a small part of its SD from the MLE
    assert dist < 0.25 * np.sqrt(np.linalg.eigvalsh(cov).min())
    assert s.sd_deg[0] < 10.0 and s.dof[0] == 2


def test_andrews_keeps_a_doubtful_bearing_down_weighted_when_all_together_are_plausible():
    # SD unknown: a bearing 25 degrees off among five that agree within a few degrees. All five together would
    # still fit with a plausible SD (below 20 degrees), so it is not dropped, only down-weighted.
    st, b = _five_around((47.2, 8.6), [3.0, -4.0, 2.0, -3.0, 25.0])
    s = one_fix(st, b, method="andrews")
    assert s.converged[0]
    assert (s.weight > 0).all() and s.weight[4] < 1.0


# Fixes with one wild bearing whose first start ends on a station, so a later start is needed (found by a
# seeded simulation: four stations 0.5-2 km away, SD 5 degrees, the first bearing 40-120 degrees off).
LATER_START_FIXES = {
    "huber": ([46.336036, 46.350293, 46.340587, 46.343155], [12.003467, 12.017034, 12.035047, 12.030236],
              [81.85, 210.94, 280.83, 271.05]),
    "andrews": ([46.013393, 46.015171, 46.014416, 46.015299], [9.804224, 9.818953, 9.79865, 9.833782],
                [193.49, 259.68, 103.32, 255.35]),
}


@pytest.mark.parametrize("method", LATER_START_FIXES)
def test_a_later_start_is_placed_in_the_first_plane(method):
    # Starts are planar points about the stations' centroid; they must be solved in that plane even after an
    # earlier start of the same fix was carried elsewhere. The answer is then an optimum for an outside
    # optimiser: scipy's Nelder-Mead on the robust objective with geographiclib azimuths, started 30 m away,
    # comes back to it (Huber 1964 / Andrews 1974 rho of the chord residual 2 sin(r/2) / sd, c = 1.5).
    lat, lon, b = (np.array(v) for v in LATER_START_FIXES[method])
    st = np.column_stack([lat, lon])
    sd, c = np.radians(5.0), 1.5
    s = one_fix(st, b, method=method, sd_deg=np.full(4, 5.0))
    assert s.converged[0], estimators.ENDINGS[s.ending[0]]

    def objective(p):
        t = 2 * np.sin(np.radians(b - exact_bearings(st, p)) / 2) / sd
        if method == "huber":
            return np.sum(np.where(np.abs(t) <= c, 0.5 * t * t, c * np.abs(t) - 0.5 * c * c))
        return np.sum(np.where(np.abs(t) < c * np.pi, c * c * (1 - np.cos(t / c)), 2 * c * c))

    start = WGS.Direct(s.lat[0], s.lon[0], 45.0, 30.0)
    x0 = np.array([start["lat2"], start["lon2"]])
    simplex = np.array([x0, x0 + [3e-4, 0.0], x0 + [0.0, 3e-4]])
    ref = optimize.minimize(objective, x0, method="Nelder-Mead",
                            options={"xatol": 1e-9, "fatol": 1e-13, "maxiter": 4000, "initial_simplex": simplex}).x
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.05
    # and away from every station (the likelihood has no optimum on a station)
    assert min(WGS.Inverse(la, lo, s.lat[0], s.lon[0])["s12"] for la, lo in st) > 50.0


def test_plane_residuals_at_gathered_points_match_the_compass_angle_formula():
    """Residuals at each fix's point, gathered by an index per bearing, against the definition: the observed
    plane direction minus the compass direction atan2(east, north) of point minus station, wrapped to
    (-pi, pi] (numpy's arctan2 on the offsets, not dfkit's formula)."""
    from dfkit.estimators.plane import residuals, sin_cos_residuals

    rng = np.random.default_rng(7)
    n_fix, n = 50, 400
    at = rng.integers(0, n_fix, n)
    x, y = rng.normal(0, 500, n_fix), rng.normal(0, 500, n_fix)
    sx, sy = rng.normal(0, 800, n), rng.normal(0, 800, n)
    phi = rng.uniform(-np.pi, np.pi, n)
    sp, cp = np.sin(phi), np.cos(phi)
    ref = np.angle(np.exp(1j * (phi - np.arctan2(x[at] - sx, y[at] - sy))))
    before = [v.copy() for v in (x, y, sx, sy)]
    r, dx, dy, d2 = residuals(sp, cp, sx, sy, x, y, at)
    np.testing.assert_allclose(r, ref, rtol=0, atol=1e-12)
    np.testing.assert_allclose(d2, np.hypot(x[at] - sx, y[at] - sy) ** 2, rtol=1e-12)
    sn, cs = sin_cos_residuals(sp, cp, sx, sy, x, y, at)[:2]
    np.testing.assert_allclose(sn, np.sin(ref), rtol=0, atol=1e-12)
    np.testing.assert_allclose(cs, np.cos(ref), rtol=0, atol=1e-12)
    # the inputs are left as they were (the offsets are computed in arrays of their own)
    for v, v0 in zip((x, y, sx, sy), before):
        np.testing.assert_array_equal(v, v0)


def test_mle_fixes_solved_together_beside_a_fix_that_cannot_be_solved_match_a_general_optimiser():
    """Several fixes in one call, one of them a lone bearing (never verified), so that the others are
    checked beside bearings of a fix that failed: each fix against scipy's Nelder-Mead on Lenth's (1981)
    likelihood, sum cos(residual), with geographiclib azimuths (as in the single-fix test above)."""
    rng = np.random.default_rng(3)
    base = np.array([(47.0, 15.0), (47.0, 15.013), (47.013, 15.016), (47.014, 14.996)])
    lat, lon, obs, grp, truth = [], [], [], [], []
    for k in range(2):
        st = base + np.array([0.05 * k, 0.04 * k])
        tgt = (47.008 + 0.05 * k, 15.005 + 0.04 * k)
        b = exact_bearings(st, tgt) + rng.normal(0, 2.0, len(st))
        lat += list(st[:, 0]); lon += list(st[:, 1]); obs += list(b); grp += [k] * len(st); truth.append(tgt)
    lat.append(46.5); lon.append(14.5); obs.append(30.0); grp.append(2)      # a lone bearing
    s = estimators.solve(np.array(lat), np.array(lon), np.array(obs), np.array(grp), 3, method="mle")
    assert not s.converged[2]
    g = np.array(grp)
    for k in range(2):
        st = np.column_stack([np.array(lat)[g == k], np.array(lon)[g == k]])
        ob = np.array(obs)[g == k]

        def negll(p):
            return -np.sum(np.cos(np.radians(ob - exact_bearings(st, p))))

        ref = optimize.minimize(negll, truth[k], method="Nelder-Mead",
                                options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
        assert s.converged[k]
        assert WGS.Inverse(ref[0], ref[1], s.lat[k], s.lon[k])["s12"] < 0.01


def test_a_fit_whose_likelihood_rises_onto_a_station_ends_there_as_scipy_does():
    # Invented bearings (one of four points away from the others' crossing): Lenth's likelihood (sum cos r on
    # geographiclib azimuths) keeps rising towards the first station along its own line, where that bearing
    # fits whatever it says. scipy's Nelder-Mead from the stations' centroid ends on that station too; dfkit
    # must say so (at_station), never report a verified optimum there.
    st = np.array([[46.807406, 12.776785], [46.802705, 12.788319], [46.794553, 12.782514], [46.790999, 12.766255]])
    obs = np.array([339.11, 268.17, 329.87, 47.37])
    ref = optimize.minimize(lambda p: _negll(st, obs, p), st.mean(axis=0), method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
    assert WGS.Inverse(ref[0], ref[1], st[0, 0], st[0, 1])["s12"] < 0.01
    s = one_fix(st, obs, method="mle", sd_deg=np.full(4, 4.0))
    assert not s.converged[0]
    assert s.ending_name(0) == "at_station"


def test_an_optimum_just_outside_the_station_zone_is_found_though_the_path_passes_closer():
    # Invented bearings whose optimum of Lenth's likelihood lies 19 m from the third station (stations about
    # 2 km from it, so just outside the 1 % zone where a point counts as on the station); the Newton path from
    # the least-squares start passes 16 m from that station after a halved step. The answer must still be the
    # optimum scipy's Nelder-Mead finds on geographiclib azimuths.
    st = np.array([[47.781074, 16.032425], [47.766894, 16.054291], [47.765002, 16.027811], [47.781931, 16.011291]])
    obs = np.array([190.20, 266.35, 13.56, 149.05])
    ref = optimize.minimize(lambda p: _negll(st, obs, p), st.mean(axis=0), method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
    assert 15.0 < WGS.Inverse(ref[0], ref[1], st[2, 0], st[2, 1])["s12"] < 25.0
    s = one_fix(st, obs, method="mle", sd_deg=np.full(4, 4.0))
    assert s.converged[0]
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < 0.01


@pytest.mark.parametrize("tol_m", [1e-4, 0.05, 0.5])
def test_a_caller_tolerance_bounds_the_distance_to_an_outside_optimum(tol_m):
    # Lenth (1981) MLE on geographiclib azimuths by scipy's Nelder-Mead; dfkit's answer at a caller's
    # tolerance lies within that tolerance of it (the first plane settles at a looser step than the last).
    stations = [(47.0, 15.0), (47.0, 15.013), (47.013, 15.016), (47.014, 14.996)]
    obs = exact_bearings(stations, (47.008, 15.005)) + np.array([2.0, -3.0, 1.5, -1.0])
    s = one_fix(stations, obs, method="mle", tol_m=tol_m)

    def negll(p):
        return -np.sum(np.cos(np.radians(obs - exact_bearings(stations, p))))

    ref = optimize.minimize(negll, [47.007, 15.004], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 5000}).x
    assert s.converged[0]
    assert WGS.Inverse(ref[0], ref[1], s.lat[0], s.lon[0])["s12"] < max(tol_m, 0.01)


@pytest.mark.parametrize("method", ["mle", "huber", "andrews", "lsq", "stansfield"])
@pytest.mark.parametrize("sd_given", [True, False])
@pytest.mark.parametrize("in_order", [False, True])
def test_fixes_solved_in_chunks_are_those_of_one_call_bit_for_bit(monkeypatch, method, sd_given, in_order):
    # Every fix is solved from its own bearings alone, so cutting the fixes into chunks (to bound the working
    # memory) must change no bit of any field, per fix or per bearing. Invented fixes of 1-6 bearings, rows of
    # different fixes interleaved (or in fix order, each chunk's rows one run), some wild bearings, some parallel
    # lines; the chunk size is forced down to 7.
    import importlib

    solve_mod = importlib.import_module("dfkit.estimators.solve")
    rng = np.random.default_rng(5)
    m = 60
    counts = rng.integers(1, 7, m)
    g = np.repeat(np.arange(m), counts)
    rng.shuffle(g)
    n = len(g)
    tlat, tlon = 46.0 + rng.random(m), 11.0 + rng.random(m)
    lat = tlat[g] + rng.normal(0, 0.01, n)
    lon = tlon[g] + rng.normal(0, 0.01, n)
    az = np.array([WGS.Inverse(lat[i], lon[i], tlat[g[i]], tlon[g[i]])["azi1"] for i in range(n)])
    theta = az + rng.normal(0, 4, n) + np.where(rng.random(n) < 0.1, rng.uniform(30, 90, n), 0.0)
    theta[g == 3] = 45.0                                     # one fix of parallel lines
    if in_order:                                             # the same rows, sorted by fix
        rows = np.argsort(g, kind="stable")
        g, lat, lon, theta = g[rows], lat[rows], lon[rows], theta[rows]
    sd = np.full(n, 4.0) if sd_given else None
    one = estimators.solve(lat, lon, theta, g, m, sd, method=method)
    monkeypatch.setattr(solve_mod, "SOLVE_CHUNK_FIXES", 7)
    cut = estimators.solve(lat, lon, theta, g, m, sd, method=method)
    assert _differing_fields(one, cut) == []


def _creeping_fixes(m=300, seed=11):
    """Invented fixes of 3-4 bearings 400-2000 m from the transmitter, one bearing of most fixes turned by
    100-180 degrees: many first fits creep onto a station, and some later start succeeds."""
    rng = np.random.default_rng(seed)
    counts = rng.integers(3, 5, m)
    g = np.repeat(np.arange(m), counts)
    n = len(g)
    tlat, tlon = 47.0 + rng.random(m), 12.0 + rng.random(m)
    lat, lon, theta = np.empty(n), np.empty(n), np.empty(n)
    for i in range(n):
        d = WGS.Direct(tlat[g[i]], tlon[g[i]], rng.uniform(0, 360), rng.uniform(400, 2000))
        lat[i], lon[i] = d["lat2"], d["lon2"]
        theta[i] = d["azi2"] + 180.0 + rng.normal(0, 4)
    first = np.concatenate(([0], np.cumsum(counts)[:-1]))
    turned = first[rng.random(m) < 0.8]
    theta[turned] += rng.uniform(100, 180, len(turned)) * rng.choice([-1, 1], len(turned))
    return lat, lon, theta % 360.0, g, m


def _differing_fields(one, two):
    """The fields of two solutions that are not the same bit for bit (dtype, shape and values; NaN equal to NaN)."""
    import dataclasses

    differ = []
    for f in dataclasses.fields(one):
        a, b = getattr(one, f.name), getattr(two, f.name)
        if isinstance(a, np.ndarray):
            same = a.dtype == b.dtype and a.shape == b.shape and np.array_equal(a, b, equal_nan=True)
        else:
            same = a == b
        if not same:
            differ.append(f.name)
    return differ


@pytest.mark.parametrize("method", ["mle", "huber", "andrews", "stansfield"])
@pytest.mark.parametrize("sd_given", [True, False])
def test_later_starts_run_together_give_the_answers_of_one_after_another(monkeypatch, method, sd_given):
    # A fix whose first start fails tries its other starts; running them all at once (each start a fix of its
    # own) must change no bit of any field, iterations included (those of the starts tried up to the one that
    # succeeds).
    import importlib

    solve_mod = importlib.import_module("dfkit.estimators.solve")
    lat, lon, theta, g, m = _creeping_fixes()
    sd = np.full(len(g), 4.0) if sd_given else None
    seen = []
    original = solve_mod._later_starts_together

    def spy(ctx, state, todo, *args):
        before = state["verified"].copy()
        original(ctx, state, todo, *args)
        seen.append((int(todo.sum()), int((state["verified"] & ~before).sum())))

    monkeypatch.setattr(solve_mod, "_later_starts_together", spy)
    together = estimators.solve(lat, lon, theta, g, m, sd, method=method)
    assert seen and sum(t for t, _ in seen) > sum(s for _, s in seen) > 0    # some fixes failed every start
    monkeypatch.setattr(solve_mod, "STARTS_TOGETHER", False)
    assert _differing_fields(together, estimators.solve(lat, lon, theta, g, m, sd, method=method)) == []


@pytest.mark.parametrize("method", ["mle", "huber", "andrews"])
@pytest.mark.parametrize("sd_given", [True, False])
def test_halvings_proven_to_fail_are_skipped_without_changing_a_bit(monkeypatch, method, sd_given):
    # Step halvings that one bearing's term already proves to fail the Armijo test are not evaluated; the first
    # one that passes is the same as when every halving is evaluated in turn, so every field is the same bit for
    # bit. Fits creeping onto stations overshoot them with long steps, so the proof rules out many halvings.
    from dfkit.estimators import iterate

    lat, lon, theta, g, m = _creeping_fixes(seed=12)
    sd = np.full(len(g), 4.0) if sd_given else None
    ruled_out = []
    original = iterate._proven_to_fail

    def spy(*args):
        out = original(*args)
        ruled_out.append(int(out.sum()))
        return out

    monkeypatch.setattr(iterate, "_proven_to_fail", spy)
    skipping = estimators.solve(lat, lon, theta, g, m, sd, method=method)
    assert sum(ruled_out) > 0
    monkeypatch.setattr(iterate, "_proven_to_fail", lambda form, sub, lams, *rest: np.zeros(lams.shape, bool))
    assert _differing_fields(skipping, estimators.solve(lat, lon, theta, g, m, sd, method=method)) == []


def test_a_bearing_points_away_where_its_cosine_is_not_positive():
    # The solver flags a bearing behind the fix by cos r <= 0, worked out without the cosine for wrapped residuals:
    # it must be numpy's cos r <= 0 on every double next to +-pi/2, on the ends of [-pi, pi], and outside it.
    solve_mod = importlib.import_module("dfkit.estimators.solve")
    half = np.pi / 2
    near = [half]
    lo = hi = half
    for _ in range(500):
        lo, hi = np.nextafter(lo, 0.0), np.nextafter(hi, 4.0)
        near += [lo, hi]
    near = np.array(near)
    rng = np.random.default_rng(8)
    wrapped = np.concatenate([near, -near, rng.uniform(-np.pi, np.pi, 100_000), [np.pi, -np.pi, 0.0, -0.0, np.nan]])
    for r in (wrapped, np.concatenate([wrapped, [4.0, -5.5, 2 * np.pi]])):
        with np.errstate(invalid="ignore"):
            want = np.cos(r) <= 0
        assert np.array_equal(solve_mod._points_away(r), want)
    assert want[:len(near)].any() and not want[:len(near)].all()
