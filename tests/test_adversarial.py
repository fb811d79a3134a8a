"""The adversarial corpus (tests/adversarial/): hostile inputs, each with the exit status and message expected.

Every case must end with its exit status and message and no traceback; no row may vanish (used + rejected =
the rows counted by hand), every fix label must reach the output with a status, and no output may carry a
spreadsheet formula, invalid XML or JSON, or raw markup into a map.
"""

import csv
import importlib.util
import json
import math
import re
import shutil
import tomllib
from xml.parsers import expat

import pytest

from dfkit import read_bearings
from dfkit.cli import main
from dfkit.io.sheet import read_sheet

from .conftest import ROOT

CORPUS = ROOT / "tests" / "adversarial"
CASES = tomllib.loads((CORPUS / "cases.toml").read_text(encoding="utf-8"))["case"]
# OWASP "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection, from memory): first characters that make
# a spreadsheet run a cell; dfkit also treats a line feed so (a carriage return inside a cell is written as one).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r", "\n")
PLAIN_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _param(case):
    marks = [pytest.mark.xfail(strict=True, reason=case["xfail"])] if "xfail" in case else []
    return pytest.param(case, id=case["name"], marks=marks)


def test_corpus_files_are_made_by_their_script():
    spec = importlib.util.spec_from_file_location("make_corpus", CORPUS / "make_corpus.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    made = mod.corpus()
    on_disk = {p.name: p.read_bytes() for p in (CORPUS / "files").iterdir()}
    assert made == on_disk
    used = {c["file"] for c in CASES} | {m for c in CASES for s in c["steps"] for a in s["args"]
                                          for m in re.findall(r"\{c:([^}]+)\}", a)}
    assert set(on_disk) <= used, f"files no case uses: {sorted(set(on_disk) - used)}"


def _expand(arg, f, folder, out):
    arg = arg.replace("{f}", str(f)).replace("{o}", str(out))
    return re.sub(r"\{c:([^}]+)\}", lambda m: str(folder / m.group(1)), arg)


def _cells(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.reader(fh))


def _unguard(cell):
    return cell[1:] if re.match("^'+[=+\\-@\t\r\n]", cell) else cell


@pytest.mark.parametrize("case", [_param(c) for c in CASES])
def test_hostile_input(case, tmp_path, capsys):
    folder, out = tmp_path / "in", tmp_path / "o"
    folder.mkdir()
    out.mkdir()
    names = {case["file"]} | {m for s in case["steps"] for a in s["args"] for m in re.findall(r"\{c:([^}]+)\}", a)}
    names |= set(case.get("read", {}).values())
    for name in names:
        shutil.copy(CORPUS / "files" / name, folder / name)
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    f = folder / case["file"]

    for step in case["steps"]:
        args = [_expand(a, f, folder, out) for a in step["args"]]
        code = main(args)            # an uncaught exception here is a traceback: the case fails
        got = capsys.readouterr()
        allowed = step["exit"] if isinstance(step["exit"], list) else [step["exit"]]
        assert code in allowed, (args, code, got.out[-2000:], got.err[-2000:])
        assert "Traceback" not in got.out + got.err
        if "out" in step:
            assert re.search(step["out"], got.out), got.out[-3000:]
        if "err" in step:
            assert re.search(step["err"], got.err), got.err[-3000:]
        if code == 2:
            lines = [ln for ln in got.err.splitlines() if ln.strip()]
            assert len(lines) == 1 and lines[0].startswith("dfkit: "), got.err   # one message, no more

    if case.get("unchanged"):
        assert {p.name: p.read_bytes() for p in folder.iterdir() if p.name in before} == before

    if "lines" in case or "rows" in case:
        read = {k: str(folder / v) for k, v in case.get("read", {}).items()}
        b = read_bearings(f, **read)
        used = sorted(b.table["line"].tolist())
        rejected = sorted({p.line for p in b.problems if p.severity == "error" and p.source == b.source and p.line})
        if "lines" in case:
            assert used == case["lines"]["used"] and rejected == case["lines"]["rejected"]
        if "rows" in case:
            assert len(used) + len(rejected) == case["rows"] == b.n_rows      # no row lost, none invented
            assert not set(used) & set(rejected)
    if "comments" in case:
        assert read_sheet(f).comment_lines == case["comments"]

    if "labels" in case:
        rows = _cells(out / "fixes.csv")
        head = rows[0]
        fixes = [_unguard(r[head.index("fix")]) if "--verbatim-csv" not in case["steps"][0]["args"]
                 else r[head.index("fix")] for r in rows[1:]]
        for label in case["labels"]:
            assert fixes.count(label) == 1, (label, fixes)
        assert all(r[head.index("status")] for r in rows[1:])

    for name in case.get("csv_safe", []):
        for r in _cells(out / name):
            for cell in r:
                assert not cell.startswith(FORMULA_STARTS) or PLAIN_NUMBER.match(cell), (name, cell)

    for name in case.get("xml_valid", []):
        p = expat.ParserCreate()
        p.Parse((out / name).read_bytes(), True)     # raises ExpatError on invalid XML

    for name in case.get("json_valid", []):
        def no_nan(token):
            raise ValueError(f"{token} is not JSON (RFC 8259)")
        json.loads((out / name).read_text(encoding="utf-8"), parse_constant=no_nan)

    if "ok_region" in case:
        rows = _cells(out / case["ok_region"])
        head = rows[0]
        for r in rows[1:]:
            if r[head.index("status")] == "ok":
                a, b_ = r[head.index("semi_major_m")], r[head.index("semi_minor_m")]
                assert a and b_ and math.isfinite(float(a)) and float(b_) > 0, r

    if "not_parallel" in case:
        rows = _cells(out / "fixes.csv")
        head = rows[0]
        status = {r[head.index("fix")]: r[head.index("status")] for r in rows[1:]}
        for label in case["not_parallel"]:
            assert status[label] != "parallel", status

    if "html_absent" in case:
        page = (out / "map.html").read_text(encoding="utf-8")
        for text in case["html_absent"]:
            assert text not in page, text

    if "browser" in case:
        from .browser import CHROMIUM
        from .test_map_browser import Page

        if CHROMIUM is None:
            pytest.skip("Debian's chromium is not installed")
        from playwright.sync_api import sync_playwright

        with sync_playwright() as pw:
            page = Page(pw, out / case["browser"])
            try:
                assert page.outside == [] and page.errors == [], (page.outside, page.errors)
                assert page.counts()["fix"] == case["browser_fixes"]
                assert page.page.locator("#fixes .fix").count() == case["browser_fixes"]
            finally:
                page.browser.close()
