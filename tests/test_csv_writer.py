"""dfkit's CSV writer writes byte for byte what pandas' ``DataFrame.to_csv`` writes for the same prepared table.

The reference is pandas itself (``to_csv(index=False, lineterminator="\\n")`` under QUOTE_MINIMAL, as dfkit
wrote its tables before it formatted the cells itself), on tables with the awkward cells: NaN, -0.0,
infinity, huge and tiny floats, missing times, text needing quotes, line ends, formula-looking text, booleans,
integers, and columns repeating few values (formatted once per value).
"""

from __future__ import annotations

import csv
import io

import numpy as np
import pandas as pd
import pytest

from dfkit.export import csv as dcsv
from dfkit.export.csv import write_table


def _pandas_bytes(df, guard=True):
    """What write_table wrote when pandas formatted every table (the prepared table, the same header)."""
    table = dcsv._for_csv(df, guard)
    header = dcsv.neutralise_formulas(pd.Series([str(c) for c in table.columns], dtype=object), guard=guard).tolist()
    first = table.iloc[:, 0]
    hashed = header[0].startswith("#") or ((first.dtype == object or pd.api.types.is_string_dtype(first.dtype))
                                           and bool(first.astype(str).str.startswith("#").any()))
    buf = io.StringIO()
    table.to_csv(buf, index=False, header=header, lineterminator="\n",
                 quoting=csv.QUOTE_NONNUMERIC if hashed else csv.QUOTE_MINIMAL)
    return buf.getvalue().encode("utf-8")


def _varied(n, rng):
    floats = rng.normal(0, 1, n) * 10.0 ** rng.integers(-30, 30, n)
    floats[::7] = np.nan
    floats[1::11] = -0.0
    floats[2::13] = np.inf
    floats[3::17] = -np.inf
    floats[4::19] = 1e16
    floats[5::23] = 1e-5
    text = np.array(["plain", "", "a,b", 'say "hi"', "two\nlines", "cr\rhere", "crlf\r\nhere", "=1+2", "-x", "+3",
                     "-12.5", "@home", "\ttab", "'=A1", "Grüße ✓", " padded ", "#not first"], dtype=object)
    times = pd.Series(pd.to_datetime(rng.integers(1.7e9, 1.8e9, n), unit="s", utc=True))
    times[::5] = pd.NaT
    return pd.DataFrame({
        "fix": [f"F{i}" for i in range(n)],
        "lat": rng.uniform(-90, 90, n),                      # rounded to 7 decimals by the writer
        "lon": rng.uniform(-180, 180, n),
        "cov_en_m2": rng.normal(0, 1e-3, n),                 # rounds to -0.0 and 0.0 often
        "raw": floats,
        "few": rng.choice([0.0, -0.0, 0.1, 2.5, np.nan, 1e300], n),   # few distinct values
        "count": rng.integers(-5, 10**12, n),
        "small": rng.integers(0, 3, n),
        "flag": rng.random(n) < 0.5,
        "time": times,
        "note": rng.choice(text, n),
        "status": rng.choice(["ok", "flagged", "failed"], n),
        "maybe": pd.Series(rng.choice(np.array(["x", None, "y,z"], dtype=object), n), dtype=object),
    })


@pytest.mark.parametrize("n", [3, 1500, 45_000])      # 45,000 rows: written in three pieces
@pytest.mark.parametrize("guard", [True, False])
def test_same_bytes_as_pandas(tmp_path, n, guard):
    df = _varied(n, np.random.default_rng(n))
    out = tmp_path / "t.csv"
    write_table(df, out, guard_formulas=guard)
    assert dcsv._formats_all(dcsv._for_csv(df, guard))                       # the fast writer did the work
    assert out.read_bytes() == _pandas_bytes(df, guard)


def test_cells_needing_quotes_as_the_csv_module_writes_them():
    # the reference is Python's csv module (QUOTE_MINIMAL, lineterminator "\n"), on cells made of the characters
    # that decide its quoting and a few others
    rng = np.random.default_rng(14)
    alphabet = np.array([",", '"', "\n", "\r", "\x00", "a", " ", "é", "'", "=", "\t", "😀"])
    cells = ["".join(rng.choice(alphabet, rng.integers(0, 7))) for _ in range(20_000)]
    cells += ['""', ",", "\n", "a\r\nb"]
    for cell in cells:
        buf = io.StringIO()
        try:
            csv.writer(buf, lineterminator="\n").writerow([cell, ""])
        except csv.Error:       # a NUL the csv module will not write
            continue
        assert dcsv._quoted([cell]) == [buf.getvalue()[:-2]], repr(cell)


def test_header_needing_quotes_and_empty_table(tmp_path):
    df = pd.DataFrame({"a,b": [1.5, np.nan], 'say "x"': ["q", ""], "=sum": [True, False]})
    write_table(df, tmp_path / "h.csv")
    assert (tmp_path / "h.csv").read_bytes() == _pandas_bytes(df)
    empty = df.iloc[:0]
    write_table(empty, tmp_path / "e.csv")
    assert (tmp_path / "e.csv").read_bytes() == _pandas_bytes(empty)


def test_tables_the_fast_writer_leaves_to_pandas(tmp_path):
    # a first column that could start with '#' (quoted throughout), a single column, mixed-type cells
    for df in (pd.DataFrame({"fix": ["#1", "2"], "lat": [1.0, 2.0]}),
               pd.DataFrame({"only": ["", "x"]}),
               pd.DataFrame({"fix": ["a", "b"], "mixed": pd.Series([1.5, "x"], dtype=object)})):
        assert df.shape[1] < 2 or df["fix"].str.startswith("#").any() or not dcsv._formats_all(df)
        write_table(df, tmp_path / "p.csv")
        assert (tmp_path / "p.csv").read_bytes() == _pandas_bytes(df)


def _short_decimals(n, d, rng):
    """Floats nearest to decimals of ``d`` places (the writer builds their text from digit tables), of every size
    up to 2**52 units of the last place, either sign, with the edges of Python's positional form (1e-4) and of
    three-digit groups among them."""
    units = np.floor(rng.uniform(-1, 1, n) * 2.0 ** rng.uniform(0, 52, n))
    values = units / 10.0 ** d
    edges = [0.0, -0.0, 9e-05, -3e-7, 999.0, 1000.0, -1000.0, 999999.0, 1e6, np.nan, np.inf]
    edges += [(2.0 ** 52 - 1) / 10.0 ** d]
    edges += [-1000.5, 999999.5, -0.5] if d >= 1 else []
    edges += [1e-4, -1e-4, 1.2e-4, 0.000101] if d >= 6 else []
    values[:len(edges)] = edges[:n]
    return values


@pytest.mark.parametrize("n", [20, 3000])
def test_short_decimals_same_bytes_as_pandas(tmp_path, n):
    rng = np.random.default_rng(7 + n)
    cols = {"fix": [f"F{i}" for i in range(n)]}
    for d in range(10):
        cols[f"d{d}"] = _short_decimals(n, d, rng)
    cols["mixed"] = np.where(rng.random(n) < 0.5, 0.1 + 0.2, cols["d3"])        # no short decimal for all: repr
    cols["lat"] = rng.uniform(-90, 90, n)                                    # rounded to 7 by the writer
    cols["n"] = rng.integers(-10**15, 10**15, n) // 10 ** rng.integers(0, 16, n)
    edge = np.iinfo(np.int64)
    cols["edge"] = np.resize(np.array([edge.min, edge.max, -(2 ** 62), 2 ** 62 - 1, 0], np.int64), n)
    cols["lowest"] = np.resize(np.array([edge.min, 0, 5, -7], np.int64), n)    # |min| overflows to itself
    df = pd.DataFrame(cols)
    write_table(df, tmp_path / "d.csv")
    assert (tmp_path / "d.csv").read_bytes() == _pandas_bytes(df)


@pytest.mark.parametrize("guard", [True, False])
def test_parts_prepared_one_at_a_time(tmp_path, monkeypatch, guard):
    # Long tables are prepared (times, rounding, formula guard) part by part: with parts of 7 rows and joins of 3,
    # some parts hold no time, no formula-looking cell or no text needing quotes while others do.
    monkeypatch.setattr(dcsv, "_ROWS_PER_WRITE", 7)
    monkeypatch.setattr(dcsv, "_ROWS_PER_JOIN", 3)
    rng = np.random.default_rng(11)
    df = _varied(200, rng)
    df.loc[:40, "time"] = pd.NaT
    df.loc[50:90, "note"] = "plain"
    hashed = df.assign(fix=np.where(np.arange(200) == 150, "#150", df["fix"]))       # quoted throughout
    odd = df.assign(lat=pd.Series(df["lat"].tolist(), dtype=object))                 # rounded column of objects
    for table in (df, hashed, odd, df.iloc[:7], df.iloc[:8]):
        write_table(table, tmp_path / "p.csv", guard_formulas=guard)
        assert (tmp_path / "p.csv").read_bytes() == _pandas_bytes(table, guard)


@pytest.mark.parametrize("guard", [True, False])
def test_columns_of_one_value_same_bytes_as_pandas(tmp_path, monkeypatch, guard):
    # Columns whose every cell is the same (written as one text for all rows), next to each other and at the end,
    # among columns that differ in one cell only (first, middle, last: not one value).
    monkeypatch.setattr(dcsv, "_ROWS_PER_WRITE", 50)
    n = 120
    one = {"fix": [f"F{i}" for i in range(n)], "method": ["mle"] * n, "sd": np.full(n, 4.0), "zero": np.full(n, -0.0),
           "none": np.full(n, np.nan), "count": np.full(n, 4), "flag": np.full(n, True), "empty": [""] * n,
           "formula": ["=1+2"] * n, "comma": ["a,b"] * n, "quote": ['say "x"'] * n, "cr": ["x\ry"] * n}
    for k, at in enumerate((0, n // 2, n - 1, 75)):     # 75: the middle of the part 50-99, 99: its last
        f = np.full(n, 2.5)
        f[at] = -2.5
        t = np.array(["ok"] * n, dtype=object)
        t[at] = "flagged"
        z = np.full(n, 0.0)
        z[at] = -0.0                                      # equal as numbers, written otherwise
        one.update({f"f{k}": f, f"t{k}": t, f"z{k}": z})
    missing = ["x"] * n
    missing[75] = None                                    # pandas' NA (no truth value) amid one value
    one["missing"] = pd.array(missing, dtype="string")
    one["last"] = ["x"] * n
    df = pd.DataFrame(one)
    write_table(df, tmp_path / "c.csv", guard_formulas=guard)
    assert (tmp_path / "c.csv").read_bytes() == _pandas_bytes(df, guard)
