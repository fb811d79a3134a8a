"""Observer positions written to a coarse step: the step read per row, the SD it adds to a bearing, and regions
that stay honest (dfkit.observations.precision, dfkit.locate.rounding)."""

import numpy as np
import pandas as pd
import pyproj
import pytest

import dfkit
from dfkit.locate import locate
from dfkit.locate.rounding import added_sd_deg
from dfkit.observations.precision import angle_text_step, metres_per_degree

GEOD = pyproj.Geod(ellps="WGS84")


def test_metres_per_degree_against_geodesics():
    # Reference: pyproj's Geod (Karney 2013): the geodesic length of 0.001° of latitude and of longitude.
    for lat in (0.0, 30.0, 47.9, 70.0):
        north, east = metres_per_degree(lat)
        d_n = GEOD.inv(10.0, lat - 0.0005, 10.0, lat + 0.0005)[2]
        d_e = GEOD.inv(9.9995, lat, 10.0005, lat)[2]
        assert north * 0.001 == pytest.approx(d_n, rel=1e-6)
        assert east * 0.001 == pytest.approx(d_e, rel=1e-6)


@pytest.mark.parametrize("az, range_m, step_deg", [(0.0, 1500.0, 1e-3), (37.0, 800.0, 1e-3), (90.0, 600.0, 1e-3),
                                                   (128.0, 2500.0, 1e-3), (250.0, 900.0, 1.0 / 3600)])
def test_added_sd_against_monte_carlo(az, range_m, step_deg):
    # Brute force with pyproj alone: an observer written to step_deg in lat and lon stood anywhere in the cell
    # around the point read; the geodesic azimuth from where it stood to the fix spreads by the SD dfkit adds to
    # the line drawn from the point read (first order: sigma_perp / range).
    rng = np.random.default_rng(5)
    lat0, lon0 = 47.9, -91.8
    lon_f, lat_f, _ = GEOD.fwd(lon0, lat0, az, range_m)
    k = 200_000
    lat = lat0 + rng.uniform(-step_deg / 2, step_deg / 2, k)
    lon = lon0 + rng.uniform(-step_deg / 2, step_deg / 2, k)
    azi = np.asarray(GEOD.inv(lon, lat, np.full(k, lon_f), np.full(k, lat_f))[0])
    sd_mc = np.std((azi - az + 180.0) % 360.0 - 180.0)
    north, east = metres_per_degree(lat0)
    got = float(added_sd_deg(step_deg * east, step_deg * north, az, range_m))
    assert got == pytest.approx(sd_mc, rel=0.02)      # the sample SD of 200,000 draws is good to about 0.2 %


@pytest.mark.parametrize("text, axis, step_arcsec", [
    ("47.810", "lat", 3.6), ("-91.7", "lon", 360.0), ("47.8165", "lat", 0.36), ("47 48.6", "lat", 6.0),
    ("N47 48.60", "lat", 0.6), ("48°58'07\"N", "lat", 1.0), ("48°58'07.4\"N", "lat", 0.1),
    ("4751.6N", "lat", 6.0), ("08005.12W", "lon", 0.6), ("0800512W", "lon", 1.0)])
def test_step_read_from_the_text(text, axis, step_arcsec):
    # by hand: the last part's decimals, in degrees (1°=3600"), minutes (60") or seconds
    assert angle_text_step(text, axis) * 3600 == pytest.approx(step_arcsec)


def _steps(path):
    b = dfkit.read_bearings(path)
    t = b.table
    if "position_step_east_m" not in t:
        return np.zeros(len(t)), np.zeros(len(t))
    return t["position_step_east_m"].to_numpy(float), t["position_step_north_m"].to_numpy(float)


def test_steps_per_row_and_form(write_sheet):
    north, east = metres_per_degree(np.array([47.81, 47.8, 47.8, 47.8, 47.8]))
    p = write_sheet("fix,lat,lon,utm_zone,easting,northing,mgrs,bearing,sd\n"
                    "A,47.810,-91.700,,,,,10,2\n"              # 3 decimals (trailing zeros kept in the text)
                    "A,47.800012,-91.800034,,,,,100,2\n"        # 6 decimals: not rounded
                    "A,,,15T,591300,5303300,,200,2\n"           # UTM to 100 m
                    "A,,,,,,15TWP91300330,300,2\n"             # MGRS, 8 digits: a 10 m square
                    "A,47°48'00\"N,91°48'00\"W,,,,,330,2\n")      # whole seconds
    e, n = _steps(p)
    assert e[0] == pytest.approx(0.001 * east[0]) and n[0] == pytest.approx(0.001 * north[0])
    assert e[1] == n[1] == 0.0
    assert e[2] == n[2] == 100.0
    assert e[3] == n[3] == 10.0
    assert e[4] == pytest.approx(east[4] / 3600) and n[4] == pytest.approx(north[4] / 3600)


def test_a_lost_trailing_zero_takes_the_fix_step(write_sheet):
    # a plain CSV's numbers are read as numbers: 47.810 is 47.81. Row 2 (both ending in 0) would look like
    # 2 decimals; its fix's other rows show 3, exactly ten times finer: the row takes 3.
    p = write_sheet("fix,lat,lon,bearing,sd\nA,47.816,-91.723,10,2\nA,47.81,-91.7,100,2\nA,47.829,-91.715,200,2\n")
    b = dfkit.read_bearings(p)
    steps = b.table["position_step_north_m"].to_numpy(float)
    assert steps == pytest.approx(np.full(3, steps[0]), rel=1e-4)     # (the length of a degree varies a little)
    assert steps[0] == pytest.approx(0.001 * metres_per_degree(47.816)[0])


def test_a_sheet_that_really_mixes_3_and_5_decimals_keeps_the_coarse_steps(write_sheet):
    # 40 fixes, each with two GPS rows (5 decimals) and two rows written to 3 decimals: 80 rows 100 times coarser
    # than their fix's finest, where chance (both coordinates losing two trailing zeros, 1 row in 10,000) gives
    # none. They are written that way, not zeros lost: each keeps its 3-decimal step (about 111 m north-south).
    rng = np.random.default_rng(5)
    rows = []
    for f in range(40):
        lat, lon = 47.8 + rng.uniform(0, 0.1), -91.7 + rng.uniform(0, 0.1)
        for j in range(4):
            d = 5 if j < 2 else 3
            rows.append(f"F{f},{lat + rng.uniform(-0.01, 0.01):.{d}f},{lon + rng.uniform(-0.01, 0.01):.{d}f},"
                        f"{rng.uniform(0, 360):.1f},2")
    b = dfkit.read_bearings(write_sheet("fix,lat,lon,bearing,sd\n" + "\n".join(rows) + "\n"))
    steps = b.table["position_step_north_m"].to_numpy(float).reshape(40, 4)
    assert (steps[:, :2] == 0).all()
    coarse = steps[:, 2:].ravel()
    # 3 decimals unless the value itself ends in 0 (then 2 decimals: 1 row in 100 has both coordinates so)
    assert np.mean(np.isclose(coarse, 0.001 * metres_per_degree(47.85)[0], rtol=2e-3)) >= 0.95


def test_no_step_columns_for_fine_positions(write_sheet):
    p = write_sheet("fix,lat,lon,bearing,sd\nA,47.816123,-91.723456,10,2\nA,47.810012,-91.700003,100,2\n"
                    "A,47.829001,-91.715002,200,2\n")
    assert "position_step_east_m" not in dfkit.read_bearings(p).table


def test_mgrs_reference_names_a_square_whose_centre_is_unbiased():
    # An MGRS reference names the square the point lies in, its digits truncated, not rounded (NGA.STND.0037,
    # 2014, from memory; the mgrs package (GEOTRANS) writes references so: checked here with pyproj). Points
    # drawn evenly in their squares must then scatter about the position dfkit reads with mean 0 and SD
    # square / sqrt(12) per axis (a uniform distribution); the square's corner would be half a square off.
    import mgrs

    from dfkit import grids

    rng = np.random.default_rng(11)
    tf = pyproj.Transformer.from_crs(4326, 32615, always_xy=True)
    back = pyproj.Transformer.from_crs(32615, 4326, always_xy=True)
    e0 = rng.uniform(560_000, 640_000, 3000)
    n0 = rng.uniform(5_280_000, 5_330_000, 3000)
    lon, lat = back.transform(e0, n0)
    de, dn = [], []
    for a, o in zip(lat, lon):
        ref = mgrs.MGRS().toMGRS(a, o, MGRSPrecision=3)          # 100 m squares
        la, lo = grids.parse_mgrs(ref)[0][:2]
        e, n = tf.transform(lo, la)
        de.append(e)
        dn.append(n)
    de, dn = e0 - np.array(de), n0 - np.array(dn)
    se = 100 / np.sqrt(12) / np.sqrt(len(de))
    assert abs(de.mean()) < 4 * se and abs(dn.mean()) < 4 * se
    assert np.std(de) == pytest.approx(100 / np.sqrt(12), rel=0.05)
    assert np.std(dn) == pytest.approx(100 / np.sqrt(12), rel=0.05)
    assert np.abs(de).max() <= 50.0 + 1e-6 and np.abs(dn).max() <= 50.0 + 1e-6


def _rounded_sheet(path, n_fix=500, decimals=3, sd=2.0, with_sd=True, seed=3):
    rng = np.random.default_rng(seed)
    lon0, lat0, _ = GEOD.fwd(np.full(n_fix, -91.8), np.full(n_fix, 47.9), rng.uniform(0, 360, n_fix),
                             rng.uniform(0, 20000, n_fix))
    n = 4
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(n)[None, :] * 90.0 + rng.uniform(-15, 15, (n_fix, n))
    dist = rng.uniform(600, 2500, (n_fix, n))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, n), np.repeat(lat0, n), ang.ravel(), dist.ravel())
    obs = (np.asarray(back) + rng.normal(0, sd, n_fix * n)) % 360.0
    rows = [f"F{i // n},{la:.{decimals}f},{lo:.{decimals}f},{b:.1f}" + (f",{sd:g}" if with_sd else "")
            for i, (la, lo, b) in enumerate(zip(lat_s, lon_s, obs))]
    path.write_text("fix,lat,lon,bearing" + (",sd" if with_sd else "") + "\n" + "\n".join(rows) + "\n")
    return np.asarray(lat0), np.asarray(lon0)


def test_rounded_positions_keep_regions_honest(tmp_path):
    # Observers written to 3 decimals (~111 m x 75 m), bearing SD 2° given, 600-2500 m: the ok regions must hold
    # the truth about 95 % of the time (a 95 % region). Without the rounding in the SDs they held it 85 % of the
    # time (benchmarks/coverage_positions.py). 500 fixes: the binomial SE is 1 %; 92 % is 3 SE below 95 %.
    p = tmp_path / "rounded.csv"
    tlat, tlon = _rounded_sheet(p)
    fx = locate(dfkit.read_bearings(p))
    ok = (fx.table["status"] == "ok").to_numpy()
    inside = np.asarray(fx.contains(tlat, tlon), bool)
    assert ok.mean() > 0.9
    assert inside[ok].mean() >= 0.92
    reasons = fx.table["reason"][ok]
    assert reasons.str.contains("observer positions were written to steps of about 111 m north-south").any()
    assert any("observer positions written to a coarse step" in t for t in fx.notes)


def test_estimated_sd_fixes_are_left_as_they_were(tmp_path):
    # where the SD is estimated from the fix's residuals, nothing is added: the same answers as without the
    # step columns
    p = tmp_path / "est.csv"
    _rounded_sheet(p, n_fix=60, with_sd=False)
    b = dfkit.read_bearings(p)
    assert "position_step_east_m" in b.table
    with_steps = locate(b).table
    b.table = b.table.drop(columns=["position_step_east_m", "position_step_north_m"])
    without = locate(b).table
    pd.testing.assert_frame_equal(with_steps, without)


def test_negligible_rounding_changes_nothing(tmp_path):
    # 5 decimals (1.1 m x 0.75 m) count as not rounded: no step columns, the same answers bit for bit as 6 decimals
    # would give for the same numbers (both read as the same floats)
    p5 = tmp_path / "five.csv"
    _rounded_sheet(p5, n_fix=40, decimals=5)
    b = dfkit.read_bearings(p5)
    assert "position_step_east_m" not in b.table


def test_bearings_out_read_back_gives_the_same_steps(tmp_path):
    # a --bearings-out table read back: its step and rounding columns are dfkit's own (not read as input), the
    # positions come back as the same rounded numbers, so the steps are found again and the SD is not counted twice
    p = tmp_path / "r.csv"
    _rounded_sheet(p, n_fix=5)
    fx = locate(dfkit.read_bearings(p))
    b = fx.bearings
    assert "rounding_sd_deg" in b and (b["sd"] == 2.0).all()
    out = tmp_path / "b.csv"
    b.to_csv(out, index=False)
    again = locate(dfkit.read_bearings(out))
    for c in ("position_step_east_m", "position_step_north_m", "rounding_sd_deg"):
        np.testing.assert_allclose(again.bearings[c].to_numpy(float), b[c].to_numpy(float), rtol=1e-9)
    np.testing.assert_allclose(again.table["region_reach_m"].to_numpy(float),
                               fx.table["region_reach_m"].to_numpy(float), rtol=1e-6)


def test_positions_taken_as_exact_on_request(tmp_path):
    p = tmp_path / "r.csv"
    _rounded_sheet(p, n_fix=5)
    b = dfkit.read_bearings(p, position_rounding="none")
    assert "position_step_east_m" not in b.table
    with pytest.raises(ValueError, match=r"position_rounding='exact' is not one of auto, none"):
        dfkit.read_bearings(p, position_rounding="exact")


def test_cli_says_the_rounding(tmp_path, capsys):
    from dfkit.cli import main

    p = tmp_path / "r.csv"
    _rounded_sheet(p, n_fix=20)
    out = tmp_path / "fixes.csv"
    assert main(["fix", str(p), "-o", str(out)]) in (0, 1)     # (1: some fix flagged)
    err = capsys.readouterr()
    assert "observer positions written to a coarse step (80 rows lat/lon to steps of up to 111 m" in err.out + err.err
    t = pd.read_csv(out)
    assert t["reason"].fillna("").str.contains("the region allows for that rounding").any()
    assert (t["sd_deg"] == 2.0).all()          # the SD as given; the SD used per bearing is in the bearings table


def test_chunks_on_threads_give_the_same_answers(tmp_path):
    # (dfkit.locate.parallel: each chunk solves its own fixes; the note is made once, for the whole sheet)
    p = tmp_path / "r.csv"
    _rounded_sheet(p, n_fix=30)
    b = dfkit.read_bearings(p)
    one, two = locate(b), locate(b, jobs=2)
    pd.testing.assert_frame_equal(one.table, two.table)
    pd.testing.assert_frame_equal(one.bearings, two.bearings)
    assert one.notes == two.notes


def test_a_lost_trailing_zero_in_text_cells_too():
    # a spreadsheet's typed numbers reach the parser as their shortest text ('47.81' for a cell showing 47.810):
    # the same rule as for values
    df = pd.DataFrame({"fix": ["A", "A", "A"], "lat": ["47.816", "47.81", "47.829"],
                       "lon": ["-91.723", "-91.7", "-91.715"], "bearing": ["10", "100", "200"], "sd": ["2", "2", "2"]})
    steps = dfkit.read_bearings(df).table["position_step_north_m"].to_numpy(float)
    assert steps == pytest.approx(np.full(3, 0.001 * metres_per_degree(47.816)[0]), rel=1e-4)


# --- the step as written: trailing zeros in the cell's text ------------------------------------------------------

_DEG_N = metres_per_degree(47.87)[0]          # length of one degree of latitude there [m]


def _fixed_sheet(rng, n_fix, decimals, extra=""):
    """Fixes of three observers, every cell written with ``decimals`` decimals (a writer's fixed format)."""
    rows = []
    for f in range(n_fix):
        lat, lon = 47.8 + rng.uniform(0, 0.1), -91.7 + rng.uniform(0, 0.1)
        for j in range(3):
            rows.append(f"F{f},{lat + rng.uniform(-0.01, 0.01):.{decimals}f},"
                        f"{lon + rng.uniform(-0.01, 0.01):.{decimals}f},{rng.uniform(0, 360):.1f},2{extra}")
    return rows


def test_trailing_zeros_written_in_a_gps_fix_are_meant(write_sheet):
    # line 2 is written '47.8700,-91.8100': 4 decimals, a 0.0001° step (11 m north-south), though its value needs
    # only 2 (0.01°, 1.1 km); the fix's other rows are GPS positions (6 decimals, not rounded)
    p = write_sheet("fix,lat,lon,bearing,sd\nA,47.8700,-91.8100,10,2\nA,47.881234,-91.805312,200,2\n"
                    "A,47.865012,-91.840091,100,2\n")
    e, n = _steps(p)
    assert n[0] == pytest.approx(1e-4 * _DEG_N, rel=1e-6)
    assert n[1] == n[2] == 0.0


@pytest.mark.parametrize("padded", [False, True])
def test_a_fixed_decimals_sheet_keeps_its_step_where_a_fix_ends_in_zeros(write_sheet, padded):
    # a sheet written '%.4f' throughout: fix Z's three rows all happen to end in '00' (written 47.8700 ...), so their
    # values need 2 decimals and the fix has no finer row to lend its step; as written they have 4 (11 m). (Also
    # with every cell padded with spaces, which the reader strips.)
    rng = np.random.default_rng(11)
    rows = _fixed_sheet(rng, 30, 4)
    rows += ["Z,47.8700,-91.8100,10,2", "Z,47.8800,-91.8200,130,2", "Z,47.8600,-91.8300,250,2"]
    if padded:
        rows = [r.replace(",", " , ") for r in rows]
    e, n = _steps(write_sheet("fix,lat,lon,bearing,sd\n" + "\n".join(rows) + "\n"))
    assert n[-3:] == pytest.approx(np.full(3, 1e-4 * _DEG_N), rel=1e-3)
    # and every other row: 4 decimals (a row whose both values end in 0 takes it as written too)
    assert n[:-3] == pytest.approx(np.full(90, 1e-4 * _DEG_N), rel=2e-3)


@pytest.mark.parametrize("careful", [False, True])
def test_zeros_that_pad_every_cell_are_not_taken_for_decimals(write_sheet, careful):
    # positions taken to 3 decimals and written '%.4f' (a column formatted to 4 decimals): every cell ends in 0,
    # where a writer of 4 real decimals ends both coordinates in 0 one row in 100. The zeros are padding: the step
    # is 3 decimals (111 m north-south), or 2 where the value ends in 0 too and its fix has no 3-decimal row (none
    # here by construction: each fix's first row is moved off the 0.01 grid)
    rng = np.random.default_rng(12)
    rows = []
    for f in range(40):
        lat, lon = 47.8 + rng.uniform(0, 0.1), -91.7 + rng.uniform(0, 0.1)
        for j in range(3):
            a, o = round(lat + rng.uniform(-0.01, 0.01), 3), round(lon + rng.uniform(-0.01, 0.01), 3)
            if j == 0 and round(a * 100) == a * 100:
                a += 0.001
            rows.append(f"F{f},{a:.4f},{o:.4f},{rng.uniform(0, 360):.1f},2" + (',"x"' if careful else ""))
    head = "fix,lat,lon,bearing,sd" + (",note" if careful else "")
    e, n = _steps(write_sheet(head + "\n" + "\n".join(rows) + "\n"))
    assert n == pytest.approx(np.full(120, 1e-3 * _DEG_N), rel=3e-3)


def test_spreadsheet_numbers_are_read_by_their_values(tmp_path):
    # an .xlsx cell holds the number 47.87 whatever its format shows: its step is the value's (2 decimals) unless its
    # fix has a row exactly ten or a hundred times finer (the trailing-zero rules)
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["fix", "lat", "lon", "bearing", "sd"])
    for r in ([ "A", 47.87, -91.81, 10, 2], ["A", 47.8812, -91.8053, 200, 2], ["A", 47.8651, -91.8413, 100, 2]):
        ws.append(r)
    for row in ws.iter_rows(min_row=2, min_col=2, max_col=3):
        for c in row:
            c.number_format = "0.0000"
    p = tmp_path / "s.xlsx"
    wb.save(p)
    e, n = _steps(p)
    assert n == pytest.approx(np.full(3, 1e-4 * _DEG_N), rel=1e-3)


# --- UTM: a 100 m sheet's rows that land on 1,000 m by chance ----------------------------------------------------

def _utm_rows(rng, n, step, observer=None, on_km=0):
    """``n`` UTM rows written to ``step`` m; the first ``on_km`` of them on whole kilometres in both coordinates,
    the others off them (as chance places 1 row in 100 of a 100 m sheet)."""
    rows = []
    for i in range(n):
        e = 590_000 + step * rng.integers(0, 20_000 // step)
        nn = 5_300_000 + step * rng.integers(0, 20_000 // step)
        if i < on_km:
            e, nn = round(e, -3), round(nn, -3)
        elif step < 1000 and e % 1000 == 0 and nn % 1000 == 0:
            e += step
        rows.append(f"F{i // 3},15T,{e},{nn},{rng.uniform(0, 360):.1f},2" + (f",{observer}" if observer else ""))
    return rows


def test_a_100_m_sheet_with_a_few_rows_on_whole_kilometres_is_100_m(write_sheet):
    # 300 rows to 100 m, 4 of them on whole km in both coordinates: chance gives 3 (1 in 100), so they are 100 m
    rng = np.random.default_rng(21)
    e, n = _steps(write_sheet("fix,utm_zone,easting,northing,bearing,sd\n" + "\n".join(_utm_rows(rng, 300, 100, on_km=4))
                              + "\n"))
    assert (e == 100.0).all() and (n == 100.0).all()


def test_a_1_km_sheet_stays_1_km(write_sheet):
    rng = np.random.default_rng(22)
    e, n = _steps(write_sheet("fix,utm_zone,easting,northing,bearing,sd\n" + "\n".join(_utm_rows(rng, 30, 1000))
                              + "\n"))
    assert (e == 1000.0).all() and (n == 1000.0).all()


def test_utm_steps_are_judged_per_observer(write_sheet):
    # observer K writes whole kilometres (6 rows), observer H 100 m (300 rows, 3 on whole km by chance): judged
    # apart, K's rows are 1 km and all of H's 100 m
    rng = np.random.default_rng(23)
    rows = _utm_rows(rng, 300, 100, "H", on_km=3) + _utm_rows(rng, 6, 1000, "K")
    e, n = _steps(write_sheet("fix,utm_zone,easting,northing,bearing,sd,observer\n" + "\n".join(rows) + "\n"))
    assert (e[:300] == 100.0).all() and (e[300:] == 1000.0).all()


@pytest.mark.parametrize("extra", ["plain", "comment_and_accent", "padded"])
def test_trailing_zeros_are_read_off_the_right_cells_on_every_read_path(write_sheet, extra):
    # 300 GPS rows (6 decimals: not rounded) and, on the last line, 47.8700,-91.8100 (4 decimals: 11 m): the
    # reader's fast paths (ASCII bytes; text with a comment line and a non-ASCII note; cells padded with spaces)
    # must find that line's cells, and no other row may come out rounded
    rng = np.random.default_rng(31)
    rows = [f"F{i // 3},{47.8 + rng.uniform(0, 0.1):.6f},{-91.7 + rng.uniform(0, 0.1):.6f},{rng.uniform(0, 360):.1f},2"
            for i in range(300)]
    rows.append("F99,47.8700,-91.8100,10,2")
    head = "fix,lat,lon,bearing,sd"
    if extra == "comment_and_accent":
        rows = [r + ",n" for r in rows]
        rows.insert(150, "# a comment line")
        rows[10] = rows[10][:-1] + "é"
        head += ",note"
    elif extra == "padded":
        rows = [r.replace(",", " , ") for r in rows]
    e, n = _steps(write_sheet(head + "\n" + "\n".join(rows) + "\n"))
    assert n[-1] == pytest.approx(1e-4 * _DEG_N, rel=1e-6)
    # a GPS row whose latitude and longitude both end in 00 would show 4 decimals too (1 in 10,000): none here
    assert (n[:-1] == 0).all()


def test_an_exponent_says_nothing_beyond_its_value(write_sheet):
    # 4.787E1 is 47.87 (2 decimals as a value): its text shows no decimals of its own, so its step stays the
    # value's, 0.01° (as before); the other cell of the row, -91.81, too
    p = write_sheet("fix,lat,lon,bearing,sd\nA,4.787E1,-91.81,10,2\nA,47.8812345,-91.8053123,200,2\n"
                    "A,47.8654321,-91.8412345,100,2\n")
    e, n = _steps(p)
    assert n[0] == pytest.approx(1e-2 * _DEG_N, rel=1e-3)


def test_whole_degrees_with_no_point_anywhere(write_sheet):
    # no decimal point in the whole body: each position is written to whole degrees (a 1° step), as its values say
    p = write_sheet("fix,lat,lon,bearing\nA,47,15,10\nA,48,16,200\nA,46,14,100\n")
    e, n = _steps(p)
    assert n == pytest.approx(metres_per_degree(np.array([47.0, 48.0, 46.0]))[0])
