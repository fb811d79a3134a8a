"""What a sheet's units and north say about its other cells (issue 7, field trial): an SD written in mils on mil
rows, a --declination with no magnetic bearing to apply it to, and what a magnetic bearing without a time needs."""

import pytest

from dfkit import read_bearings
from dfkit.cli import main

STATIONS = ["47.8473227,15.1531455", "47.8581248,15.1757928", "47.8740193,15.1479690"]


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


def test_an_sd_in_mils_on_mil_rows_is_pointed_out_once(write_sheet):
    # 6400 mils to the circle (US Army FM 21-26, ch. 6): 50 mil = 50 * 360 / 6400 = 2.8125 deg
    rows = "".join(f"A,{s},{b},mil,50\n" for s, b in zip(STATIONS, (355.5, 4978.0, 2666.5)))
    b = read_bearings(write_sheet("fix,lat,lon,bearing,unit,sd\n" + rows))
    assert errors(b) == []
    (w,) = [p for p in b.problems if p.severity == "warning"]
    assert (w.line, w.column) == (2, "sd") and "write 2.8 (50 mil in degrees)" in w.message
    assert "2 more mil rows, to line 4" in w.message and "20°" in w.message


def test_an_sd_in_degrees_on_mil_rows_is_left_alone(write_sheet):
    rows = "".join(f"A,{s},{b},mil,3\n" for s, b in zip(STATIONS, (355.5, 4978.0, 2666.5)))
    b = read_bearings(write_sheet("fix,lat,lon,bearing,unit,sd\n" + rows))
    assert [p for p in b.problems if p.severity != "note"] == []


def test_an_sd_of_mils_too_large_for_degrees_gets_the_reading(write_sheet):
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,unit,sd\nA,{STATIONS[0]},355.5,mil,120\n"))
    (line, col, msg), = errors(b)
    assert col == "sd" and "120 mil would be 6.8°" in msg          # 120 * 360 / 6400 = 6.75


def test_grad_rows_with_an_sd_get_a_note(write_sheet):
    # 400 grads to the circle (FM 21-26): 1 grad = 0.9 deg, so the two readings of an SD differ by a tenth
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,unit,sd\nA,{STATIONS[0]},22.2,grad,3\n"
                                  f"A,{STATIONS[1]},311.1,grad,3\n"))
    assert any("grad rows too" in n and "0.9°" in n for n in b.notes)


def test_a_declination_with_no_magnetic_bearing_is_said_to_be_unused(write_sheet, capsys):
    path = write_sheet(f"fix,lat,lon,bearing\nA,{STATIONS[0]},20\nA,{STATIONS[1]},280\n")
    b = read_bearings(path, declination=3.0)
    assert any("--declination 3 was given, but no bearing is magnetic" in n for n in b.notes)
    assert b.table["true_bearing"].tolist() == [20.0, 280.0]
    main(["check", str(path), "--declination", "3"])
    assert "no bearing is magnetic" in capsys.readouterr().out
    # with a magnetic bearing there is nothing to say
    b = read_bearings(path, declination=3.0, north="magnetic")
    assert not any("no bearing is magnetic" in n for n in b.notes)
    assert b.table["true_bearing"].tolist() == pytest.approx([23.0, 283.0])


def test_a_magnetic_bearing_without_a_time_names_every_way_out(write_sheet):
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,north\nA,{STATIONS[0]},20,magnetic\n"))
    (line, col, msg), = errors(b)
    assert col == "time" and "declination column" in msg and "--declination" in msg


def test_a_sheet_without_a_north_says_its_bearings_are_read_as_true_north(write_sheet):
    # a forgotten --north magnetic is the commonest slip; the reading must be said when nothing names the north
    from dfkit import read_bearings

    plain = write_sheet("fix,lat,lon,bearing\nA,47,15,45\nA,47,15.02,315\n")
    said = [n for n in read_bearings(plain).notes if "read as true north" in n]
    assert len(said) == 1 and "--north magnetic" in said[0]
    named = write_sheet("fix,lat,lon,bearing,north\nA,47,15,45,true\nA,47,15.02,315,true\n", name="named.csv")
    assert not [n for n in read_bearings(named).notes if "read as true north" in n]
    assert not [n for n in read_bearings(plain, north="magnetic", declination=3).notes if "read as true north" in n]
