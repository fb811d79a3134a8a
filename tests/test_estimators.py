"""Fixes against outside references: geographiclib geodesics, Karney's published intersection, scipy."""

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from scipy import optimize, stats

from dfkit import estimators, geodesy, regions

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
    # METHODS.md section 1 synthetic fix (plane metres): stations, observed bearings; placed on the equator
    # where a 2 km plane and the ellipsoid differ by far less than the check tolerance.
    xs = np.array([0, 1000, 1200, -300.0])
    ys = np.array([0, 0, 1500, 1600.0])
    lat, lon = geodesy.from_local(0.0, 0.0, xs, ys)
    return np.column_stack([lat, lon]), np.array([26.0, 323.3, 234.6, 134.0])


@pytest.mark.parametrize("method, expected", [
    # [OWN] values of METHODS.md section 1/2, computed there by an independent implementation and
    # cross-checked with Nelder-Mead: least-squares start, Lenth MLE, Stansfield with sd = 2 deg.
    ("lsq", (392.975481, 891.240358)),
    ("mle", (395.878578, 894.247670)),
    ("stansfield", (396.226392, 892.949166)),
])
def test_methods_check_values(method, expected):
    st, b = _plane_example()
    s = one_fix(st, b, method=method, sd_deg=np.full(4, 2.0) if method == "stansfield" else None)
    x, y = geodesy.to_local(0.0, 0.0, s.lat, s.lon)
    assert (x[0], y[0]) == pytest.approx(expected, abs=2e-3)


def test_covariance_is_the_inverse_fisher_information():
    # Cramer-Rao bound (Torrieri 1984; METHODS.md section 11): J = sum u u^T / (d sigma)^2, u perpendicular to
    # the line of sight station -> fix; computed here directly from the geometry with geographiclib.
    st, b = _plane_example()
    s = one_fix(st, b, method="stansfield", sd_deg=np.full(4, 2.0))
    J = np.zeros((2, 2))
    for la, lo in st:
        inv = WGS.Inverse(la, lo, s.lat[0], s.lon[0])
        a = np.radians(inv["azi1"])
        u = np.array([np.cos(a), -np.sin(a)])
        J += np.outer(u, u) / (inv["s12"] * np.radians(2.0)) ** 2
    assert s.cov_en[0] == pytest.approx(np.linalg.inv(J), rel=1e-4)


def test_estimated_sd_uses_n_minus_2_degrees_of_freedom():
    st, b = _plane_example()
    s = one_fix(st, b, method="mle")
    r = s.residual_deg
    assert s.sd_deg[0] == pytest.approx(np.sqrt(np.sum(r**2) / (4 - 2)))
    assert not s.sd_known[0] and s.dof[0] == 2


def test_robust_andrews_ignores_a_wild_bearing_and_huber_reduces_it():
    st, b = _plane_example()
    st5 = np.vstack([st, np.column_stack(geodesy.from_local(0.0, 0.0, [800.0], [-600.0]))])
    b5 = np.append(b, 330.0)
    sd = np.full(5, 2.0)
    mle = one_fix(st5, b5, method="mle")
    hub = one_fix(st5, b5, method="huber", sd_deg=sd)
    andr = one_fix(st5, b5, method="andrews", sd_deg=sd)
    four = one_fix(st, b, method="andrews", sd_deg=sd[:4])
    assert andr.weight[4] == 0.0
    # with the wild bearing at zero weight, Andrews is the same fix as without it
    assert WGS.Inverse(andr.lat[0], andr.lon[0], four.lat[0], four.lon[0])["s12"] < 1e-3
    truth = geodesy.from_local(0.0, 0.0, 400.0, 900.0)
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


@pytest.mark.parametrize("p, k", [(0.50, 1.177410), (0.90, 2.145966), (0.95, 2.447747), (0.99, 3.034854)])
def test_chi_square_scale_factor(p, k):
    # k = sqrt(chi2_2(p)) = sqrt(-2 ln(1-p)) (bivariate normal; Stansfield 1947)
    assert regions.scale_factor(p) == pytest.approx(k, abs=1e-6)
    assert regions.scale_factor(p) == pytest.approx(np.sqrt(stats.chi2.ppf(p, 2)))


@pytest.mark.parametrize("n, k", [(3, 19.974984), (4, 6.164414), (5, 4.370834), (10, 2.986292)])
def test_f_scale_factor(n, k):
    # k = sqrt(2 F(0.95; 2, n-2)); closed form F = (m/2)((1-p)^(-2/m) - 1).
    m = n - 2
    closed = np.sqrt(2 * (m / 2) * (0.05 ** (-2 / m) - 1))
    assert regions.scale_factor(0.95, [m])[0] == pytest.approx(k, abs=1e-6)
    assert regions.scale_factor(0.95, [m])[0] == pytest.approx(closed, rel=1e-9)


def test_ellipse_axes_closed_form():
    # A diagonal covariance 100^2 east, 50^2 north: major axis east (azimuth 90), semi-axes k*100 and k*50.
    e = regions.ellipse_axes(np.diag([100.0**2, 50.0**2])[None], 2.0)
    assert (e.semi_major_m[0], e.semi_minor_m[0], e.orientation_deg[0]) == pytest.approx((200, 100, 90))
    assert e.area_m2[0] == pytest.approx(np.pi * 200 * 100)
    e = regions.ellipse_axes(np.array([[[1.0, 0.9], [0.9, 1.0]]]), 1.0)   # NE-SW elongation
    assert e.orientation_deg[0] == pytest.approx(45.0)


def _simulate(n_fix, n_bear, sd, rng, known):
    lat0, lon0 = 46.5, 7.5
    tl, tn = [], []
    stations, bearings, groups = [], [], []
    for k in range(n_fix):
        tgt = (lat0 + rng.uniform(-0.5, 0.5), lon0 + rng.uniform(-0.5, 0.5))
        ang = rng.uniform(0, 360) + np.arange(n_bear) * 360 / n_bear + rng.normal(0, 15, n_bear)
        rng_m = rng.uniform(600, 2000, n_bear)
        for a, r in zip(ang, rng_m):
            d = WGS.Direct(tgt[0], tgt[1], a, r)
            stations.append((d["lat2"], d["lon2"]))
            bearings.append((d["azi2"] + 180.0 + rng.normal(0, sd)) % 360)
            groups.append(k)
        tl.append(tgt[0])
        tn.append(tgt[1])
    st = np.array(stations)
    s = estimators.solve(st[:, 0], st[:, 1], bearings, groups, n_fix,
                         np.full(len(bearings), sd) if known else None)
    k = regions.scale_factor(0.95, np.where(s.sd_known, 0, s.dof))
    inside = []
    for i in range(n_fix):
        x, y = geodesy.to_local(s.lat[i], s.lon[i], tl[i], tn[i])
        v = np.array([x, y])
        inside.append(v @ np.linalg.solve(s.cov_en[i], v) <= k[i] ** 2)
    return np.mean(inside)


def test_coverage_with_known_sd():
    # Simulation with a known truth: 95% ellipses must hold the transmitter 93-97% of the time.
    rate = _simulate(3000, 3, 5.0, np.random.default_rng(11), known=True)
    assert 0.93 <= rate <= 0.97


def test_coverage_with_sd_estimated_from_five_bearings():
    rate = _simulate(3000, 5, 5.0, np.random.default_rng(12), known=False)
    assert 0.93 <= rate <= 0.97


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
