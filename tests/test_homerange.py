"""Home ranges against independent computations: scipy's convex hull, geographiclib's geodesic polygon
areas, brute-force quadrature of the LSCV criterion, and the closed-form isopleth areas of bivariate normals.

Closed form used throughout: for a bivariate normal with covariance S, the region holding probability p is
the ellipse x' S^-1 x <= q with q = -2 ln(1 - p) (the chi-square quantile with 2 degrees of freedom), of
area pi q sqrt(det S) (e.g. Johnson & Wichern, Applied Multivariate Statistical Analysis, 6th ed., 2007,
result 4.7 [from memory]). For the expected kernel estimate of normal data, E[f^] = N(0, S + h^2 I)
(the convolution of two normals; Silverman 1986, section 4.3 [from memory]).
"""

import math

import numpy as np
import pandas as pd
import pyproj
import pytest
from geographiclib.geodesic import Geodesic
from scipy.optimize import minimize_scalar
from scipy.spatial import ConvexHull

from dfkit import homerange as hr
from dfkit.cli import main

# A deterministic 10-point set (metres), small enough to check by hand.
TEN = np.array([(0, 0), (10, 5), (20, -3), (5, 18), (-12, 7), (30, 25), (-8, -15), (14, -20), (40, 2), (-25, -5)],
               float)


def normal_area(p, cov):
    return -2 * math.log(1 - p) * math.pi * math.sqrt(np.linalg.det(cov))


# ------------------------------------------------------------------ MCP

def test_mcp_full_is_scipy_convex_hull():
    poly, kept = hr.mcp(TEN[:, 0], TEN[:, 1], 1.0)
    assert kept == 10
    assert poly.area == pytest.approx(ConvexHull(TEN).volume, rel=1e-12)   # 2-D "volume" is the area
    assert poly.area == pytest.approx(1687.0)                                # shoelace by hand on the hull


def test_mcp_level_drops_the_fixes_farthest_from_the_mean_centre():
    d = np.hypot(*(TEN - TEN.mean(axis=0)).T)
    keep = np.argsort(d)[:9]                          # 90 % of 10 fixes: the farthest, (-25, -5), goes
    assert tuple(TEN[np.argmax(d)]) == (-25, -5)
    poly, kept = hr.mcp(TEN[:, 0], TEN[:, 1], 0.9)
    assert kept == 9
    assert poly.area == pytest.approx(ConvexHull(TEN[keep]).volume, rel=1e-12)
    assert poly.area == pytest.approx(1520.0)


def test_mcp_of_collinear_or_too_few_points_is_none():
    assert hr.mcp([0, 1, 2, 3], [0, 1, 2, 3], 1.0)[0] is None
    assert hr.mcp([0, 1], [0, 1], 1.0)[0] is None


# ------------------------------------------------------------------ bandwidths

def test_reference_bandwidth_is_sigma_n_to_minus_one_sixth():
    # Worton (1995): sigma = sqrt((s_x^2 + s_y^2) / 2), sample variances; Silverman (1986): h = sigma n^(-1/6)
    sx2 = np.sum((TEN[:, 0] - TEN[:, 0].mean()) ** 2) / 9
    sy2 = np.sum((TEN[:, 1] - TEN[:, 1].mean()) ** 2) / 9
    assert hr.reference_bandwidth(TEN[:, 0], TEN[:, 1]) == pytest.approx(math.sqrt((sx2 + sy2) / 2) * 10 ** (-1 / 6))


def brute_lscv(points, h, half_width=400.0, step=0.5):
    """LSCV(h) = integral of f^2 - (2/n) sum_i f_-i(X_i), by quadrature on a fine grid (no closed form used)."""
    n = len(points)
    g = np.arange(-half_width, half_width + step, step)
    X, Y = np.meshgrid(g, g)
    f = np.zeros_like(X)
    for px, py in points:
        f += np.exp(-((X - px) ** 2 + (Y - py) ** 2) / (2 * h * h))
    f /= n * 2 * np.pi * h * h
    integral = (f**2).sum() * step * step
    loo = 0.0
    for i in range(n):
        d2 = np.sum((points - points[i]) ** 2, axis=1)
        d2 = np.delete(d2, i)
        loo += np.exp(-d2 / (2 * h * h)).sum() / ((n - 1) * 2 * np.pi * h * h)
    return integral - 2 * loo / n


@pytest.mark.parametrize("h", [5.0, 10.0, 20.0])
def test_lscv_formula_matches_brute_force_quadrature(h):
    assert hr.lscv_score(TEN[:, 0], TEN[:, 1], h) == pytest.approx(brute_lscv(TEN, h), rel=1e-6, abs=1e-12)


def test_lscv_bandwidth_is_the_minimiser_of_the_criterion():
    h, warning = hr.lscv_bandwidth(TEN[:, 0], TEN[:, 1])
    assert warning == ""
    ref = minimize_scalar(lambda v: brute_lscv(TEN, v, step=1.0), bounds=(12, 30), method="bounded",
                          options={"xatol": 1e-4})
    assert h == pytest.approx(ref.x, abs=0.01)


def test_lscv_on_binned_distances_matches_the_exact_sum(monkeypatch):
    # Many fixes: the pairs' squared distances are binned; the criterion and its minimiser barely move.
    rng = np.random.default_rng(8)
    x, y = rng.normal(0, 300, 1200), rng.normal(0, 150, 1200)
    exact_pairs = hr._pair_d2(x, y)
    monkeypatch.setattr(hr, "LSCV_EXACT_PAIRS", 1000)
    binned_pairs = hr._pair_d2(x, y)
    assert len(binned_pairs[0]) < len(exact_pairs[0]) / 20 and binned_pairs[1].sum() == 1200 * 1199 / 2
    for h in (10.0, 40.0, 120.0):
        exact = hr.lscv_score(x, y, h, pairs=exact_pairs)
        assert hr.lscv_score(x, y, h, pairs=binned_pairs) == pytest.approx(exact, rel=1e-3)
    h_binned = hr.lscv_bandwidth(x, y)[0]
    monkeypatch.setattr(hr, "LSCV_EXACT_PAIRS", 10**9)
    assert h_binned == pytest.approx(hr.lscv_bandwidth(x, y)[0], rel=0.01)


def test_lscv_falls_back_to_href_with_a_warning_on_repeated_fixes():
    x = np.repeat([0.0, 100.0, 200.0, 0.0], 10)      # fixes repeated on a few spots: LSCV runs to h -> 0
    y = np.repeat([0.0, 0.0, 50.0, 120.0], 10)
    h, warning = hr.lscv_bandwidth(x, y)
    assert h == pytest.approx(hr.reference_bandwidth(x, y))
    assert "h_ref used" in warning


# ------------------------------------------------------------------ kernel isopleths

@pytest.mark.parametrize("p", [0.5, 0.95])
def test_isopleth_of_one_widened_kernel_is_the_normal_ellipse(p):
    # One fix: the estimate is exactly the normal N(X, h^2 I + S), so the p region has the closed-form area.
    s = np.array([[900.0, 300.0], [300.0, 400.0]])
    d = hr.kernel_density([0.0], [0.0], 5.0, cov=s[None])
    area = hr.isopleth(d, p)[0].area
    assert area == pytest.approx(normal_area(p, s + 25.0 * np.eye(2)), rel=0.01)


@pytest.mark.parametrize("p", [0.5, 0.95])
def test_kernel_isopleth_of_normal_data_matches_the_expected_estimate(p):
    # E[f^] = N(0, diag(sx^2 + h^2, sy^2 + h^2)); stochastic, n = 2000 from a fixed seed: 5 % tolerance.
    rng = np.random.default_rng(12345)
    x, y = rng.normal(0, 100, 2000), rng.normal(0, 50, 2000)
    h = hr.reference_bandwidth(x, y)
    area = hr.isopleth(hr.kernel_density(x, y, h), p)[0].area
    expected = normal_area(p, np.diag([100.0**2 + h * h, 50.0**2 + h * h]))
    assert area == pytest.approx(expected, rel=0.05)
    # and the true density's own isopleth, -2 ln(1-p) pi sx sy, is smaller (the kernel adds h^2)
    assert area > normal_area(p, np.diag([100.0**2, 50.0**2]))


def test_isopleth_holds_its_probability_mass():
    rng = np.random.default_rng(7)
    x, y = rng.normal(0, 80, 300), rng.normal(0, 40, 300)
    d = hr.kernel_density(x, y, 20.0)
    poly, c = hr.isopleth(d, 0.95)
    inside = d.f >= c
    assert d.f[inside].sum() * d.cell_m2 / (d.f.sum() * d.cell_m2) == pytest.approx(0.95, abs=0.005)
    assert d.f.sum() * d.cell_m2 == pytest.approx(1.0, abs=1e-3)   # the grid holds the whole estimate


def test_fix_covariance_is_rebuilt_from_the_ellipse():
    s = np.array([[2500.0, -800.0], [-800.0, 900.0]])         # east/north covariance [m^2]
    lam, vec = np.linalg.eigh(s)
    major = vec[:, 1]
    orient = math.degrees(math.atan2(major[0], major[1])) % 180.0   # azimuth of the major axis
    from scipy.stats import chi2, f

    k_chi2 = math.sqrt(chi2.ppf(0.95, 2))
    k_f = math.sqrt(2 * f.ppf(0.95, 2, 3))                    # SD estimated from 5 bearings: F(2, 3)
    table = pd.DataFrame({"semi_major_m": [k_chi2 * math.sqrt(lam[1]), k_f * math.sqrt(lam[1])],
                          "semi_minor_m": [k_chi2 * math.sqrt(lam[0]), k_f * math.sqrt(lam[0])],
                          "orientation_deg": [orient, orient], "level": [0.95, 0.95],
                          "sd_source": ["given", "estimated"], "n_used": [3, 5]})
    cov = hr.fix_covariances(table)
    np.testing.assert_allclose(cov[0], s, rtol=1e-9)
    np.testing.assert_allclose(cov[1], s, rtol=1e-9)
    with_cols = table.assign(cov_ee_m2=[1.0, 2.0], cov_en_m2=[0.5, 0.0], cov_nn_m2=[3.0, 4.0])
    np.testing.assert_allclose(hr.fix_covariances(with_cols)[0], [[1.0, 0.5], [0.5, 3.0]])


# ------------------------------------------------------------------ on the ellipsoid, per tag

def scatter(lat0, lon0, east, north):
    geod = pyproj.Geod(ellps="WGS84")
    az = np.degrees(np.arctan2(east, north))
    lon, lat, _ = geod.fwd(np.full(len(east), lon0), np.full(len(east), lat0), az, np.hypot(east, north))
    return np.asarray(lat), np.asarray(lon)


def fix_table(lat, lon, tag="T1", status="ok"):
    return pd.DataFrame({"tag": tag, "lat": lat, "lon": lon, "status": status})


def test_mcp_area_on_the_ellipsoid_matches_geographiclib():
    rng = np.random.default_rng(3)
    lat, lon = scatter(47.86, 15.17, rng.normal(0, 800, 60), rng.normal(0, 500, 60))
    r = hr.home_ranges(fix_table(lat, lon), method="mcp", levels=(1.0,))
    row = r.table.iloc[0]
    # the geodesic polygon through the hull's fixes (Karney 2013, geographiclib PolygonArea)
    pts = np.column_stack([lon, lat])
    hull = ConvexHull(pts)
    poly = Geodesic.WGS84.Polygon()
    for i in hull.vertices:
        poly.AddPoint(lat[i], lon[i])
    _, _, area = poly.Compute(False, True)
    assert row["area_m2"] == pytest.approx(abs(area), rel=0.02)
    assert row["n_fixes"] == 60 and row["status"] == "ok" and np.isnan(row["bandwidth_m"])
    # the polygon written out has the same area (measured again with geographiclib on its vertices)
    poly2 = Geodesic.WGS84.Polygon()
    for x, y in list(row["geometry"].exterior.coords)[:-1]:
        poly2.AddPoint(y, x)
    assert abs(poly2.Compute(False, True)[2]) == pytest.approx(abs(area), rel=0.02)


def test_kernel_range_on_the_ellipsoid_matches_the_expected_estimate():
    rng = np.random.default_rng(11)
    east, north = rng.normal(0, 300, 1500), rng.normal(0, 150, 1500)
    lat, lon = scatter(-33.9, 151.2, east, north)
    r = hr.home_ranges(fix_table(lat, lon), method="kde", levels=(0.95,), bandwidth="href")
    row = r.table.iloc[0]
    h = row["bandwidth_m"]
    assert row["area_m2"] == pytest.approx(normal_area(0.95, np.diag([300.0**2 + h * h, 150.0**2 + h * h])),
                                           rel=0.05)


def test_ranges_do_not_depend_on_where_on_earth_or_the_antimeridian():
    rng = np.random.default_rng(5)
    east, north = rng.normal(0, 400, 80), rng.normal(0, 200, 80)
    here = hr.home_ranges(fix_table(*scatter(10.0, 0.0, east, north)), method="mcp", levels=(0.95,))
    there = hr.home_ranges(fix_table(*scatter(10.0, 179.999, east, north)), method="mcp", levels=(0.95,))
    assert there.table["area_m2"].iloc[0] == pytest.approx(here.table["area_m2"].iloc[0], rel=1e-6)
    lons = np.asarray(there.table["geometry"].iloc[0].exterior.coords)[:, 0]
    assert lons.max() - lons.min() < 1.0          # continuous across +-180, not a band around the globe


def test_only_ok_fixes_count_by_default_and_every_tag_is_reported():
    rng = np.random.default_rng(9)
    lat, lon = scatter(47.0, 15.0, rng.normal(0, 300, 40), rng.normal(0, 300, 40))
    t = fix_table(lat, lon)
    t.loc[:9, "status"] = "shallow"
    r = hr.home_ranges(t, method="mcp", levels=(1.0,), tags=["T1", "empty-tag"])
    row = r.table.set_index("tag")
    assert row.loc["T1", "n_fixes"] == 30 and row.loc["T1", "status"] == "ok"
    assert row.loc["empty-tag", "status"] == "no_range" and row.loc["empty-tag", "geometry"] is None
    few = hr.home_ranges(t.iloc[10:20], method="mcp", levels=(1.0,))
    assert few.table["status"].iloc[0] == "few_fixes"       # 10 fixes: computed but flagged


def test_widening_spreads_poor_fixes():
    rng = np.random.default_rng(2)
    lat, lon = scatter(47.0, 15.0, rng.normal(0, 200, 50), rng.normal(0, 200, 50))
    t = fix_table(lat, lon).assign(semi_major_m=400.0, semi_minor_m=100.0, orientation_deg=30.0, level=0.95,
                                   sd_source="given", n_used=3)
    plain = hr.home_ranges(t, levels=(0.95,), bandwidth=30.0)
    wide = hr.home_ranges(t, levels=(0.95,), bandwidth=30.0, widen=True)
    assert wide.table["area_m2"].iloc[0] > plain.table["area_m2"].iloc[0]
    assert "fix covariance" in wide.table["bandwidth_from"].iloc[0]


def test_bad_arguments_name_the_parameter():
    t = fix_table([47.0] * 3, [15.0, 15.01, 15.02])
    with pytest.raises(ValueError, match=r"method='convex'.*'mcp', 'kde'"):
        hr.home_ranges(t, method="convex")
    with pytest.raises(ValueError, match=r"level=1.0 must be in \(0, 1\)"):
        hr.home_ranges(t, method="kde", levels=(1.0,))
    with pytest.raises(ValueError, match=r"bandwidth='silverman'"):
        hr.home_ranges(t, bandwidth="silverman")
    with pytest.raises(ValueError, match="widen=True needs method='kde'"):
        hr.home_ranges(t, method="mcp", widen=True)


# ------------------------------------------------------------------ the command

def test_ranges_command_from_a_fix_table(tmp_path, capsys):
    import json

    import pyogrio

    rng = np.random.default_rng(4)
    lat, lon = scatter(47.0, 15.0, rng.normal(0, 300, 40), rng.normal(0, 200, 40))
    src = tmp_path / "fixes.csv"
    fix_table(lat, lon).to_csv(src, index=False)
    with open(src, "a") as fh:
        fh.write("T2,not-a-number,15.0,ok\n")              # line 42: rejected with line, column, reason
        fh.write("T3,,,too_few\n")                          # a failed fix: no position, not an error
    outs = [tmp_path / "r.geojson", tmp_path / "r.gpkg", tmp_path / "r.csv"]
    args = ["ranges", str(src), "--method", "mcp", "--levels", "50,95,100"]
    for o in outs:
        args += ["-o", str(o)]
    assert main(args) == 1                                 # a rejected row and tags without a range
    err = capsys.readouterr().err
    assert "line 42, lat: lat 'not-a-number' is not a number" in err
    gj = json.loads(outs[0].read_text())
    props = [f["properties"] for f in gj["features"]]
    assert {p["tag"] for p in props} == {"T1", "T2", "T3"}
    assert {"tag", "method", "level", "area_m2", "n_fixes", "bandwidth_m"} <= set(props[0])
    gdf = pyogrio.read_dataframe(outs[1], layer="home_ranges")
    assert len(gdf) == 9 and gdf.geometry.notna().sum() == 3
    ok = gdf[gdf["tag"] == "T1"].sort_values("level")
    assert ok["area_m2"].is_monotonic_increasing
    table = pd.read_csv(outs[2])
    assert "geometry" not in table.columns and len(table) == 9
    assert main(["ranges", str(src), "-o", str(tmp_path / "r.shp")]) == 2
    assert main(["ranges", str(src), "--levels", "abc"]) == 2
    assert main(["ranges", str(src), "--bandwidth", "-5"]) == 2
