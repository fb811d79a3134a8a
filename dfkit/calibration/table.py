"""Reading a calibration table (the CSV ``dfkit calibrate`` writes) back, with line, column and reason for bad rows."""

from __future__ import annotations

import csv
import io
import os

import numpy as np
import pandas as pd

from dfkit.calibration.groups import GROUP_STATUS, Calibration, _group_label, _key
from dfkit.problems import Problem, SheetError


def read_calibration(path) -> Calibration:
    """Read a calibration table written by ``dfkit calibrate -o CAL.csv`` (or by hand).

    Needs ``n``, ``bias_deg`` and ``sd_deg``; ``dof`` (default n - 1), ``status`` and ``by`` (the grouping
    columns joined by ``+``, one value for the whole file; needed when there is more than one group) are read
    when present. A row that cannot be used is reported with its line, column and reason, and its group is not
    used.

    Raises
    ------
    SheetError
        The file cannot be read, lacks a needed column, or names a grouping column it does not have.
    """
    name = os.fspath(path) if isinstance(path, (str, os.PathLike)) else "calibration"
    try:
        with open(path, "rb") as fh:
            text = fh.read().decode("utf-8-sig")
    except OSError as err:
        raise SheetError(f"{name}: cannot read the calibration ({err.strerror or err})") from None
    except UnicodeDecodeError:
        raise SheetError(f"{name}: the calibration is not UTF-8 text") from None
    lines = text.splitlines()
    first = next((i for i, ln in enumerate(lines) if ln.strip() and not ln.lstrip().startswith("#")), None)
    if first is None:
        raise SheetError(f"{name}: the calibration is empty (expected a header with n, bias_deg, sd_deg)")
    delim = max([",", ";", "\t"], key=lambda d: (lines[first].count(d), d == ","))
    reader = csv.reader(io.StringIO("\n".join(lines)), delimiter=delim)
    header = None
    records = []
    for row in reader:
        ln = reader.line_num
        if not row or all(not c.strip() for c in row) or row[0].lstrip().startswith("#"):
            continue
        if header is None:
            header = [" ".join(c.strip().lower().split()).replace(" ", "_") for c in row]
            header_line = ln
            continue
        records.append((ln, [c.strip() for c in row] + [""] * (len(header) - len(row))))
    missing = [c for c in ("n", "bias_deg", "sd_deg") if c not in header]
    if missing:
        raise SheetError(
            f"{name}: line {header_line}: a calibration needs the column(s) {', '.join(missing)}"
        )
    col = {c: j for j, c in enumerate(header)}
    by_values = {r[col["by"]] for _, r in records} if "by" in col else {""}
    if len(by_values) > 1:
        raise SheetError(
            f"{name}: the 'by' column differs between rows ({', '.join(sorted(by_values))}); "
            "one calibration groups all its rows the same way"
        )
    by_text = by_values.pop() if by_values else ""
    by = tuple(b for b in by_text.split("+") if b)
    for b in by:
        if b not in col:
            raise SheetError(
                f"{name}: line {header_line}: the calibration is grouped by '{b}' but has no '{b}' column"
            )
    if not by and len(records) > 1:
        raise SheetError(f"{name}: {len(records)} groups but no 'by' column saying what they are grouped by")
    problems: list[Problem] = []

    def number(ln, r, c, lo, hi, what):
        cell = r[col[c]] if c in col else ""
        try:
            v = float(cell.replace(",", ".") if delim != "," else cell)
        except ValueError:
            problems.append(Problem(ln, c, f"'{cell}' is not a number", "error", name))
            return None
        if not (np.isfinite(v) and lo <= v <= hi):
            problems.append(Problem(ln, c, f"{v:g} is not a usable {what}", "error", name))
            return None
        return v

    out = []
    seen: dict[tuple, int] = {}
    for ln, r in records:
        vals = tuple(r[col[b]] for b in by)
        nn = number(ln, r, "n", 1, np.inf, "number of trials")
        bias = number(ln, r, "bias_deg", -180, 180, "bias (degrees, -180 to 180)")
        sd = number(ln, r, "sd_deg", 1e-9, 90, "bearing SD (degrees, above 0 and below 90)")
        dof = (
            number(ln, r, "dof", 1, np.inf, "number of degrees of freedom")
            if "dof" in col and r[col["dof"]]
            else (nn - 1 if nn is not None else None)
        )
        status = r[col["status"]].strip().lower() if "status" in col else "ok"
        if status not in GROUP_STATUS:
            problems.append(
                Problem(
                    ln, "status", f"unknown status '{status}'; use {', '.join(GROUP_STATUS)}", "error", name
                )
            )
            continue
        if None in (nn, bias, sd) or (dof is None) or dof < 1:
            if dof is not None and dof < 1 and nn is not None:
                problems.append(Problem(ln, "n", "one trial cannot give an SD", "error", name))
            continue
        key = tuple(_key(v) for v in vals)
        if key in seen:
            problems.append(
                Problem(
                    ln,
                    by[0] if by else "",
                    f"group {_group_label(by, vals)} is listed twice "
                    f"(first on line {seen[key]}); the first is used",
                    "error",
                    name,
                )
            )
            continue
        seen[key] = ln
        row = {"by": "+".join(by)}
        row.update(dict(zip(by, vals)))
        row.update(
            {
                "group": _group_label(by, vals),
                "n": int(nn),
                "bias_deg": bias,
                "sd_deg": sd,
                "dof": dof,
                "status": status,
                "line": ln,
            }
        )
        out.append(row)
    table = pd.DataFrame(
        out, columns=["by", *by, "group", "n", "bias_deg", "sd_deg", "dof", "status", "line"]
    )
    return Calibration(table=table, by=by, trials=None, problems=problems, source=name)
