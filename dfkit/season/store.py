"""The season store: one GeoPackage file holding every fix, region and bearing of a season.

Layers (open the file in QGIS or with GDAL/OGR; see :mod:`dfkit.season.gpkg`):

``fixes`` (points)
    Every column of the fix table (:data:`dfkit.locate.FIX_COLUMNS`, and any
    column the table gains later), plus ``import_id``, ``source`` (the sheet's
    file name) and ``fix_key``. Fixes without a position have no geometry but
    are kept, with their status and reason.
``regions`` (multipolygons)
    The confidence region of each fix that has one (``kind`` 'ellipse'), with
    ``fix_fid`` pointing at its fix; when the fixes carry likelihood regions
    (``fixes.regions``: ``fix_id``, ``geometry``, ``bounded``) those are stored
    too, as ``kind`` 'likelihood'.
``bearings`` (station points)
    Every usable bearing with every column of the sheet, its residual and
    weight, ``fix_fid``, ``row_key``, ``content_key`` and ``moment_key`` (see
    :mod:`dfkit.season.keys`).

Tables: ``imports`` (file name, SHA-256 of its bytes, time, options, dfkit
version, counts), ``problems`` (every rejected row and warning of each import,
with line, column and reason), ``changes`` (fixes that differed from what was
stored, and what was done; and fixes added beside a stored fix of the same tag
and times), ``dfkit_meta`` (schema version, key scheme, migrations).

Store schema 2 (this version) identifies a bearing by its station and label too
(key scheme 2); a schema-1 store is migrated when opened: its identity keys are
computed again from the stored bearings, in one transaction.

Each import is one SQLite transaction (``BEGIN IMMEDIATE`` ... ``COMMIT``, with
the default rollback journal): a killed import leaves the store as it was
before it, and the next opening rolls the journal back.
"""

from __future__ import annotations

import json
import os
import sqlite3
from dataclasses import dataclass, field
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from dfkit.locate import WITH_POSITION, Fixes
from dfkit.locate.rounding import STEP_COLUMNS as _STEP_COLUMNS
from dfkit.problems import Problem
from dfkit.season import gpkg
from dfkit.season.keys import KEY_SCHEME, OLD_KEY_SCHEMES, bearing_keys, identity_keys
from dfkit.season.query import SeasonFilter
from dfkit.season.rings import ellipse_rings, lonlat_parts_many

#: Layout version of the store; a newer file is refused, an older one migrated (see :data:`_MIGRATIONS`).
SCHEMA_VERSION = 2
#: How long to wait for another program that is writing to the store [s].
BUSY_TIMEOUT_S = 30.0
#: Vertices of each stored ellipse ring.
RING_VERTICES = 32

_STORE_FIX_COLUMNS = {"import_id": "INTEGER", "source": "TEXT", "fix_key": "TEXT"}
#: Fix columns made with the table (they are indexed or filtered on); the others are added as they come.
_CORE_FIX_COLUMNS = {"fix": "TEXT", "tag": "TEXT", "time": "DATETIME", "status": "TEXT", "n_used": "INTEGER",
                     "area_m2": "REAL"}
_STORE_BEARING_COLUMNS = {"import_id": "INTEGER", "fix_fid": "INTEGER", "row_key": "BLOB",
                          "content_key": "BLOB", "moment_key": "BLOB"}
_REGION_COLUMNS = {"fix_fid": "INTEGER", "import_id": "INTEGER", "tag": "TEXT", "fix": "TEXT", "time": "DATETIME",
                   "status": "TEXT", "kind": "TEXT", "level": "REAL", "area_m2": "REAL", "semi_major_m": "REAL",
                   "semi_minor_m": "REAL", "orientation_deg": "REAL", "bounded": "BOOLEAN"}
_IMPORT_COLUMNS = {"file_name": "TEXT", "file_path": "TEXT", "file_sha256": "TEXT", "imported_utc": "DATETIME",
                   "options": "TEXT", "dfkit_version": "TEXT", "key_scheme": "TEXT", "n_rows": "INTEGER",
                   "n_rejected": "INTEGER", "n_fixes_in": "INTEGER", "n_fixes_added": "INTEGER",
                   "n_fixes_known": "INTEGER", "n_fixes_changed": "INTEGER", "n_fixes_replaced": "INTEGER",
                   "n_bearings_added": "INTEGER", "n_bearings_known": "INTEGER"}
_PROBLEM_COLUMNS = {"import_id": "INTEGER", "line": "INTEGER", "column_name": "TEXT", "severity": "TEXT",
                    "message": "TEXT", "source": "TEXT"}
_CHANGE_COLUMNS = {"import_id": "INTEGER", "tag": "TEXT", "fix": "TEXT", "kind": "TEXT", "stored_fix_fids": "TEXT",
                   "detail": "TEXT"}
#: Column names the store uses itself; sheet columns with these names are stored as ``sheet_<name>``.
_RESERVED = {"fid", "geom"} | set(_STORE_FIX_COLUMNS) | set(_STORE_BEARING_COLUMNS)

#: Indexes of the store (filters by tag, time, status and import; bearings by identity and fix).
_INDEXES = {
    "fixes_tag_time": "CREATE INDEX fixes_tag_time ON fixes (tag, time)",
    "fixes_time": "CREATE INDEX fixes_time ON fixes (time)",
    "fixes_status": "CREATE INDEX fixes_status ON fixes (status)",
    "fixes_import": "CREATE INDEX fixes_import ON fixes (import_id)",
    "fixes_key": "CREATE INDEX fixes_key ON fixes (fix_key)",
    "regions_fix": "CREATE INDEX regions_fix ON regions (fix_fid)",
    "bearings_row_key": "CREATE UNIQUE INDEX bearings_row_key ON bearings (row_key)",
    "bearings_fix": "CREATE INDEX bearings_fix ON bearings (fix_fid)",
    "bearings_moment_key": "CREATE INDEX bearings_moment_key ON bearings (moment_key)",
    "problems_import": "CREATE INDEX problems_import ON problems (import_id)",
}
#: An import adding more bearings than this (and than the store holds) rebuilds the indexes once after
#: inserting instead of updating them row by row (inside the same transaction).
_REBUILD_INDEXES_ABOVE = 50_000



def _migrate_1_to_2(conn) -> str:
    """Schema 1 -> 2: bearing identity gains the station and the label (key scheme 1 -> 2), and a moment key.

    The keys are computed from the stored bearings (tag, time, observer, station, label, how they were
    grouped), numbering repeated rows within each import as an import of that sheet would.
    """
    have = {c.lower(): c for c in gpkg.table_columns(conn, "bearings")}
    want = [c for c in ("fid", "import_id", "tag", "time", "lat", "lon", "fix", "observer", "grouped_by")
            if c in have]
    df = pd.read_sql_query(f"SELECT {', '.join(gpkg.quote(have[c]) for c in want)} FROM bearings "
                           "ORDER BY import_id, fid", conn)
    df.columns = want
    df["time"] = pd.to_datetime(df["time"], utc=True, format="ISO8601")
    for col in ("tag", "fix", "observer", "grouped_by"):
        if col in df:
            df[col] = df[col].astype(object).where(df[col].notna(), "").astype(str)
    row_key, moment_key = identity_keys(df, group=df["import_id"].to_numpy())
    if len(set(row_key.tolist())) < len(row_key):      # repeated rows split over imports: number store-wide
        row_key, moment_key = identity_keys(df)
    conn.execute("DROP INDEX IF EXISTS bearings_row_key")
    if "moment_key" not in have:
        conn.execute("ALTER TABLE bearings ADD COLUMN moment_key BLOB")
    conn.executemany("UPDATE bearings SET row_key = ?, moment_key = ? WHERE fid = ?",
                     zip(row_key.tolist(), moment_key.tolist(), df["fid"].astype(int).tolist()))
    conn.execute(_INDEXES["bearings_row_key"])
    conn.execute(_INDEXES["bearings_moment_key"])
    conn.execute("UPDATE dfkit_meta SET value = ? WHERE key = 'key_scheme'", (KEY_SCHEME,))
    gpkg.touch(conn, "bearings")
    return f"{len(df)} bearing keys computed again (key scheme {KEY_SCHEME})"


#: Schema migrations: version -> function(conn) that brings a store from that version to the next and says
#: what it did (recorded in ``dfkit_meta``).
_MIGRATIONS: dict = {1: _migrate_1_to_2}


class StoreError(ValueError):
    """The file is not a season store dfkit can use (the CLI exits with status 2)."""


@dataclass
class ImportReport:
    """What one import did.

    ``changed`` lists, for each fix that differs from what the store holds,
    (tag, fix label, what differs); those fixes were replaced when ``replaced``
    is true, otherwise left as stored. ``beside`` lists, for each added fix
    that has bearings at the same tag, time and observer as a stored fix but at
    other stations or under another label (two crews at once, or a corrected
    position), (tag, fix label, which stored fix): both are kept.
    """

    import_id: int
    file_name: str
    n_rows: int = 0
    n_rejected: int = 0
    fixes_in: int = 0
    fixes_added: int = 0
    fixes_known: int = 0
    bearings_added: int = 0
    bearings_known: int = 0
    changed: list[tuple[str, str, str]] = field(default_factory=list)
    replaced: bool = False
    added_status: dict[str, int] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    beside: list[tuple[str, str, str]] = field(default_factory=list)

    @property
    def fixes_changed(self) -> int:
        return len(self.changed)


def _with_sheet_warnings(fixes, file_name) -> list[Problem]:
    """The import's problems, and what the whole sheet shows (``Fixes.warnings``: an observer's offset, an SD
    given too small) as warnings of line 0, so they are printed with the import and kept in ``problems``."""
    return list(fixes.problems) + [Problem(0, "", w, "warning", file_name) for w in getattr(fixes, "warnings", [])]


class SeasonStore:
    """A season store file, open for reading and adding.

    Use :meth:`open` (``with SeasonStore.open("season.gpkg", create=True) as store: ...``).
    There is no "current store": every call names its file.
    """

    def __init__(self, conn: sqlite3.Connection, path: str):
        self.conn = conn
        self.path = path
        #: What opening the file migrated: one line per schema step (empty when nothing was migrated).
        self.migrated: list[str] = []

    # ------------------------------------------------------------ opening

    @classmethod
    def open(cls, path, *, create: bool = False) -> "SeasonStore":
        """Open a season store; with ``create=True`` make a new one when the file does not exist.

        Raises
        ------
        StoreError
            The file is not a GeoPackage made by dfkit, or was made by a newer dfkit.
        FileNotFoundError
            The file does not exist and ``create`` is false.
        """
        path = os.fspath(path)
        exists = os.path.exists(path) and os.path.getsize(path) > 0
        if not exists and not create:
            raise FileNotFoundError(f"no season store '{path}' (create one with: dfkit season add {path} SHEET)")
        if os.path.isdir(path):
            raise StoreError(f"'{path}' is a folder, not a season store")
        try:
            conn = sqlite3.connect(path, isolation_level=None, timeout=BUSY_TIMEOUT_S)
            conn.execute("PRAGMA foreign_keys = OFF")
            conn.execute("PRAGMA cache_size = -262144")     # 256 MiB: index inserts of a big import stay in memory
            tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        except sqlite3.OperationalError as err:
            raise StoreError(f"'{path}' could not be opened ({err}): is another program writing to "
                             "it?") from None
        except sqlite3.DatabaseError as err:
            raise StoreError(f"'{path}' is not a season store (not an SQLite/GeoPackage file: {err})") from None
        store = cls(conn, path)
        if not tables and create:
            store._create()
        else:
            store._check()
        return store

    def close(self) -> None:
        self.conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def _create(self) -> None:
        c = self.conn
        c.execute("BEGIN IMMEDIATE")
        try:
            gpkg.initialise(c)
            gpkg.create_attributes(c, "dfkit_meta", {"key": "TEXT NOT NULL UNIQUE", "value": "TEXT"},
                                   "dfkit season store: schema version and key scheme")
            c.executemany("INSERT INTO dfkit_meta (key, value) VALUES (?, ?)",
                          [("schema_version", str(SCHEMA_VERSION)), ("key_scheme", KEY_SCHEME),
                           ("created_utc", _now_text()), ("created_by", f"dfkit {_version()}")])
            gpkg.create_attributes(c, "imports", _IMPORT_COLUMNS, "one row per dfkit season add",
                                   primary_key="import_id")
            gpkg.create_attributes(c, "problems", _PROBLEM_COLUMNS, "rejected rows and warnings of each import")
            gpkg.create_attributes(c, "changes", _CHANGE_COLUMNS, "fixes that differed from the stored ones")
            gpkg.create_features(c, "fixes", "POINT", {**_STORE_FIX_COLUMNS, **_CORE_FIX_COLUMNS}, "fixes (positions, statuses)")
            gpkg.create_features(c, "regions", "MULTIPOLYGON", _REGION_COLUMNS, "confidence regions of fixes")
            gpkg.create_features(c, "bearings", "POINT", dict(_STORE_BEARING_COLUMNS),
                                 "bearings at their stations, every input column kept")
            for stmt in _INDEXES.values():
                c.execute(stmt)
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise

    def _check(self) -> None:
        c = self.conn
        if not gpkg.is_geopackage(c):
            raise StoreError(f"'{self.path}' is not a GeoPackage (its application_id is not 'GPKG')")
        try:
            meta = dict(c.execute("SELECT key, value FROM dfkit_meta").fetchall())
        except sqlite3.OperationalError:
            raise StoreError(f"'{self.path}' is a GeoPackage but not a dfkit season store "
                             "(it has no dfkit_meta table)") from None
        version = int(meta.get("schema_version", "0"))
        if version > SCHEMA_VERSION:
            raise StoreError(f"'{self.path}' was written by a newer dfkit (store schema {version}; this dfkit "
                             f"reads up to {SCHEMA_VERSION}): upgrade dfkit")
        scheme = meta.get("key_scheme")
        if scheme != KEY_SCHEME and not (version < SCHEMA_VERSION and scheme in OLD_KEY_SCHEMES):
            raise StoreError(f"'{self.path}' identifies bearings with key scheme {scheme!r}, "
                             f"this dfkit with {KEY_SCHEME!r}: imports could not be matched")
        while version < SCHEMA_VERSION:
            if version not in _MIGRATIONS:
                raise StoreError(f"'{self.path}' has store schema {version}, which this dfkit cannot migrate")
            try:
                c.execute("BEGIN IMMEDIATE")
            except sqlite3.OperationalError as err:
                raise StoreError(f"'{self.path}' has store schema {version}; this dfkit must migrate it to "
                                 f"schema {SCHEMA_VERSION}, which writes to the file, and it cannot ({err}): "
                                 "make the file writable, or use the dfkit that made it") from None
            try:
                what = _MIGRATIONS[version](c)
                c.execute("UPDATE dfkit_meta SET value = ? WHERE key = 'schema_version'", (str(version + 1),))
                line = (f"store schema {version} -> {version + 1} on {_now_text()} by dfkit {_version()}: "
                        f"{what}")
                c.execute("INSERT INTO dfkit_meta (key, value) VALUES (?, ?)",
                          (f"migrated_{version}_to_{version + 1}", line))
                gpkg.touch(c, "dfkit_meta")
                c.execute("COMMIT")
            except sqlite3.OperationalError as err:
                c.execute("ROLLBACK")
                raise StoreError(f"'{self.path}' has store schema {version} and could not be migrated to "
                                 f"{version + 1} ({err}); the file is unchanged") from None
            except BaseException:
                c.execute("ROLLBACK")
                raise
            self.migrated.append(line)
            version += 1

    @property
    def schema_version(self) -> int:
        return int(self.conn.execute("SELECT value FROM dfkit_meta WHERE key = 'schema_version'").fetchone()[0])

    # ------------------------------------------------------------ adding

    def add(self, fixes: Fixes, *, file_name: str, file_sha256: str = "", file_path: str = "",
            options: dict | None = None, n_rows: int | None = None, replace: bool = False,
            progress=None) -> ImportReport:
        """Store the fixes of one sheet as one import, in one transaction.

        Fixes whose bearings are all new are added. Fixes whose bearings are all
        stored, unchanged and as one stored fix are already there and skipped.
        Any other fix (a bearing changed, added to or missing from a stored fix)
        is *changed*: it is reported and left as stored, or, with
        ``replace=True``, the stored fixes it touches are removed and it is
        added. A fix with no usable bearing is recognised by file name, tag and
        label.

        Parameters
        ----------
        fixes : Fixes
            From :func:`dfkit.locate.locate` (with its bearings and problems).
        file_name : str
            Name of the sheet, stored with every fix (``source``).
        file_sha256, file_path : str
            Recorded in ``imports``.
        options : dict
            Reading and solving options, recorded as JSON.
        n_rows : int, optional
            Data rows in the sheet (for the record).
        replace : bool
            Replace stored fixes that the sheet changes.
        """
        say = progress or (lambda text: None)
        table = fixes.table
        bt = fixes.bearings
        m = len(table)
        row_key, content_key, moment_key = bearing_keys(bt)
        fix_of = bt["fix_id"].to_numpy(np.int64) if len(bt) else np.zeros(0, np.int64)
        n_in = np.bincount(fix_of, minlength=m)
        empty_key = _empty_keys(table, file_name)
        own_key = np.where(n_in == 0, empty_key, None)
        report = ImportReport(import_id=0, file_name=file_name, n_rows=n_rows if n_rows is not None else len(bt),
                              n_rejected=len({p.line for p in fixes.problems if p.severity == "error" and p.line}),
                              fixes_in=m, problems=_with_sheet_warnings(fixes, file_name), notes=list(fixes.notes),
                              replaced=replace)
        c = self.conn
        say("checking what the store already holds")
        c.execute("BEGIN IMMEDIATE")
        try:
            verdict, touched, details = self._classify(table, bt, row_key, content_key, fix_of, n_in, own_key,
                                                       empty_key)
            earlier = c.execute("SELECT import_id, options FROM imports WHERE file_sha256 = ? AND file_sha256 != ''",
                                (file_sha256,)).fetchall()
            opts_json = json.dumps(options or {}, sort_keys=True, default=str)
            other = [str(imp) for imp, old in earlier if old != opts_json]
            if other:
                report.notes.append(f"this file was imported before with other options (import {', '.join(other)});"
                                    " rows whose meaning changed are reported as changed")
            report.import_id = self._insert_import(file_name, file_path, file_sha256, opts_json)
            iid = report.import_id
            changed = np.flatnonzero(verdict == "changed")
            for i in changed:
                report.changed.append((str(table["tag"].iat[i]), str(table["fix"].iat[i]), details[i]))
            add = verdict == "new"
            gone = sorted({f for i in changed for f in touched[i]}) if replace else []
            beside = self._beside(table, add, moment_key, fix_of, set(gone))
            for i, (fids_b, detail) in beside.items():
                report.beside.append((str(table["tag"].iat[i]), str(table["fix"].iat[i]), detail))
            if replace and len(changed):
                self._delete_fixes(gone)
                add[changed] = True
            c.executemany("INSERT INTO changes (import_id, tag, fix, kind, stored_fix_fids, detail) VALUES "
                          "(?, ?, ?, ?, ?, ?)",
                          [(iid, r[0], r[1], "replaced" if replace else "kept_stored",
                            " ".join(str(f) for f in sorted(touched[i])), r[2])
                           for i, r in zip(changed, report.changed)]
                          + [(iid, str(table["tag"].iat[i]), str(table["fix"].iat[i]), "added_beside",
                              " ".join(str(f) for f in sorted(fb)), d) for i, (fb, d) in beside.items()])
            report.fixes_known = int((verdict == "same").sum())
            report.bearings_known = int(np.isin(fix_of, np.flatnonzero(verdict == "same")).sum())
            say(f"storing {int(add.sum())} fixes")
            keep_b = add[fix_of] if len(bt) else np.zeros(0, bool)
            stored_b = c.execute("SELECT COUNT(*) FROM bearings").fetchone()[0]
            rebuild = keep_b.sum() > max(_REBUILD_INDEXES_ABOVE, stored_b)
            if rebuild:
                for name in _INDEXES:
                    c.execute(f"DROP INDEX IF EXISTS {name}")
            fids = self._insert_fixes(table, add, iid, file_name, own_key)
            self._insert_regions(table, add, fids, iid)
            self._insert_likelihood_regions(fixes, add, fids, iid)
            self._insert_bearings(bt, keep_b, fids, fix_of, iid, row_key, content_key, moment_key)
            if rebuild:
                say("indexing")
                for stmt in _INDEXES.values():
                    c.execute(stmt)
            c.executemany("INSERT INTO problems (import_id, line, column_name, severity, message, source) VALUES "
                          "(?, ?, ?, ?, ?, ?)",
                          [(iid, p.line, p.column, p.severity, p.message, p.source) for p in report.problems])
            report.fixes_added = int(add.sum())
            report.bearings_added = int(keep_b.sum())
            st = table["status"].to_numpy()[add]
            report.added_status = {"ok": int((st == "ok").sum()),
                                   "flagged": int((np.isin(st, WITH_POSITION) & (st != "ok")).sum()),
                                   "failed": int((~np.isin(st, WITH_POSITION)).sum())}
            c.execute("UPDATE imports SET n_rows = ?, n_rejected = ?, n_fixes_in = ?, n_fixes_added = ?, "
                      "n_fixes_known = ?, n_fixes_changed = ?, n_fixes_replaced = ?, n_bearings_added = ?, "
                      "n_bearings_known = ? WHERE import_id = ?",
                      (report.n_rows, report.n_rejected, m, report.fixes_added, report.fixes_known,
                       report.fixes_changed, report.fixes_changed if replace else 0, report.bearings_added,
                       report.bearings_known, iid))
            for t in ("imports", "problems", "changes"):
                gpkg.touch(c, t)
            say("committing")
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise
        return report

    def _classify(self, table, bt, row_key, content_key, fix_of, n_in, own_key, empty_key):
        """Per incoming fix: 'new', 'same' or 'changed'; the stored fix fids it touches; what differs."""
        c = self.conn
        m = len(table)
        verdict = np.full(m, "new", dtype=object)
        touched: list[set] = [set() for _ in range(m)]
        details = [""] * m
        has_bearings = c.execute("SELECT 1 FROM bearings LIMIT 1").fetchone() is not None
        has_fixes = c.execute("SELECT 1 FROM fixes LIMIT 1").fetchone() is not None
        if not has_fixes:
            return verdict, touched, details
        # stored fixes with no bearing, known by (file, tag, label)
        if c.execute("SELECT 1 FROM fixes WHERE fix_key IS NOT NULL LIMIT 1").fetchone() is not None:
            stored_empty = dict(self._lookup("fixes", "fix_key", "fid", list(set(empty_key))))
            for i in range(m):
                f = stored_empty.get(empty_key[i])
                if f is not None:
                    touched[i].add(f)
        if has_bearings and len(bt):
            have = {col.lower() for col in gpkg.table_columns(c, "bearings")}
            # the step each observer position was written to (not part of the content key: worked out from the
            # sheet, dfkit.observations.precision); a store without the columns took every position as exact
            steps = [f"{gpkg.quote(col)}" if col in have else "NULL" for col in _STEP_COLUMNS]
            found = pd.DataFrame(self._lookup("bearings", "row_key", "fix_fid, content_key, import_id, "
                                              + ", ".join(steps), row_key.tolist()),
                                 columns=["row_key", "fix_fid", "content_key", "import_id", "stored_e", "stored_n"])
            inc = pd.DataFrame({"row_key": row_key, "content": content_key, "fix": fix_of,
                                "line": bt["line"].to_numpy()})
            for col, name in zip(_STEP_COLUMNS, ("step_e", "step_n")):
                inc[name] = bt[col].to_numpy(float) if col in bt else 0.0
            hit = inc.merge(found, on="row_key", how="inner")
            n_known = np.bincount(hit["fix"].to_numpy(np.int64), minlength=m)
            same_step = np.ones(len(hit), bool)
            for new_col, old_col in (("step_e", "stored_e"), ("step_n", "stored_n")):
                a = np.nan_to_num(hit[new_col].to_numpy(float))
                b = np.nan_to_num(pd.to_numeric(hit[old_col], errors="coerce").to_numpy(float))
                same_step &= np.isclose(a, b, rtol=1e-6, atol=1e-3)
            same_c = (hit["content"] == hit["content_key"]).to_numpy() & same_step
            step_lines = hit.loc[(hit["content"] == hit["content_key"]).to_numpy() & ~same_step]
            step_diff = {int(f): g for f, g in step_lines.groupby("fix")}
            n_same = np.bincount(hit["fix"].to_numpy(np.int64), weights=same_c, minlength=m).astype(int)
            for fx, ff in zip(hit["fix"].to_numpy(), hit["fix_fid"].to_numpy()):
                touched[fx].add(int(ff))
            all_touched = sorted({f for t in touched for f in t})
            stored_n = dict(self._lookup("bearings", "fix_fid", "COUNT(*)", all_touched, group=True))
            diff_lines = hit.loc[~same_c].groupby("fix")["line"].apply(list).to_dict()
            imports_of = hit.groupby("fix")["import_id"].apply(lambda s: sorted(set(s))).to_dict()
        else:
            n_known = np.zeros(m, int)
            n_same = np.zeros(m, int)
            stored_n, diff_lines, imports_of, step_diff = {}, {}, {}, {}
        for i in range(m):
            if not touched[i]:
                continue
            only = next(iter(touched[i])) if len(touched[i]) == 1 else None
            if n_in[i] == 0:
                if only is not None and stored_n.get(only, 0) == 0 and n_known[i] == 0:
                    verdict[i] = "same"
                    continue
            elif (only is not None and n_known[i] == n_in[i] and n_same[i] == n_in[i]
                  and stored_n.get(only, 0) == n_in[i]):
                verdict[i] = "same"
                continue
            verdict[i] = "changed"
            parts = []
            steps = step_diff.get(i)
            lines = diff_lines.get(i, [])
            if steps is not None:
                lines = [x for x in lines if x not in set(steps["line"].tolist())]
                parts.append(_step_change(steps))
            if lines:
                parts.append("line" + ("s " if len(lines) > 1 else " ") + ", ".join(str(x) for x in lines[:6])
                             + (" ..." if len(lines) > 6 else "")
                             + (" differ from the stored bearings" if len(lines) > 1 else
                                " differs from the stored bearing"))
            new_here = int(n_in[i] - n_known[i])
            if new_here and n_known[i]:
                parts.append(f"{new_here} bearing{'s' if new_here > 1 else ''} not in the stored fix")
            missing = sum(stored_n.get(f, 0) for f in touched[i]) - int(n_known[i])
            if missing > 0:
                parts.append(f"{missing} stored bearing{'s' if missing > 1 else ''} not in this sheet")
            if len(touched[i]) > 1:
                parts.append(f"its bearings belong to {len(touched[i])} stored fixes")
            if n_in[i] == 0 or not n_known[i]:
                parts.append("a stored fix of this file, tag and label has no usable bearing")
            imps = imports_of.get(i, [])
            if imps:
                parts.append("stored by import " + ", ".join(str(x) for x in imps))
            details[i] = "; ".join(parts)
        return verdict, touched, details

    def _beside(self, table, new_fix, moment_key, fix_of, gone) -> dict:
        """New fixes with bearings at the tag, time and observer of a stored bearing (but another station or
        label): fix index -> (stored fix fids, what to tell)."""
        sel = new_fix[fix_of] & np.array([k is not None for k in moment_key], bool) if len(fix_of) else []
        if not np.any(sel) or self.conn.execute("SELECT 1 FROM bearings LIMIT 1").fetchone() is None:
            return {}
        stored: dict = {}
        for key, fid in self._lookup("bearings", "moment_key", "fix_fid", sorted(set(moment_key[sel].tolist()))):
            if fid not in gone:
                stored.setdefault(key, set()).add(int(fid))
        hits: dict = {}
        for b in np.flatnonzero(sel):
            fids = stored.get(moment_key[b])
            if fids:
                hits.setdefault(int(fix_of[b]), set()).update(fids)
        if not hits:
            return {}
        names = {int(r[0]): r[1:] for r in self._lookup("fixes", "fid", "fix, import_id",
                                                         sorted({f for v in hits.values() for f in v}))}
        out = {}
        for i, fids in sorted(hits.items()):
            which = ", ".join(f"'{names[f][0]}' (import {names[f][1]})" for f in sorted(fids) if f in names)
            out[i] = (fids, f"has bearings at the tag, time and observer of stored fix {which} but from "
                            "other stations or under another label: both are kept (two crews at once; if "
                            "this sheet corrects that fix's stations, the store now holds both)")
        return out

    def _lookup(self, table, key_col, value_cols, keys, group=False):
        """Rows of ``table`` whose ``key_col`` is one of ``keys``: (key, values...) tuples."""
        out = []
        keys = list(keys)
        step = 500
        for s in range(0, len(keys), step):
            chunk = keys[s:s + step]
            q = (f"SELECT {gpkg.quote(key_col)}, {value_cols} FROM {gpkg.quote(table)} "
                 f"WHERE {gpkg.quote(key_col)} IN ({', '.join('?' * len(chunk))})")
            if group:
                q += f" GROUP BY {gpkg.quote(key_col)}"
            out.extend(self.conn.execute(q, chunk).fetchall())
        return out

    def _insert_import(self, file_name, file_path, file_sha256, opts_json) -> int:
        cur = self.conn.execute(
            "INSERT INTO imports (file_name, file_path, file_sha256, imported_utc, options, dfkit_version, "
            "key_scheme) VALUES (?, ?, ?, ?, ?, ?, ?)",
            (file_name, file_path, file_sha256, _now_text(), opts_json, _version(), KEY_SCHEME))
        return int(cur.lastrowid)

    def _delete_fixes(self, fids) -> None:
        c = self.conn
        for s in range(0, len(fids), 500):
            chunk = fids[s:s + 500]
            marks = ", ".join("?" * len(chunk))
            c.execute(f"DELETE FROM regions WHERE fix_fid IN ({marks})", chunk)
            c.execute(f"DELETE FROM bearings WHERE fix_fid IN ({marks})", chunk)
            c.execute(f"DELETE FROM fixes WHERE fid IN ({marks})", chunk)

    def _ensure_columns(self, table: str, df: pd.DataFrame, names: dict[str, str]) -> None:
        have = {c.lower() for c in gpkg.table_columns(self.conn, table)}
        for col, stored in names.items():
            if stored.lower() not in have:
                self.conn.execute(f"ALTER TABLE {gpkg.quote(table)} ADD COLUMN {gpkg.quote(stored)} "
                                  f"{gpkg.sql_type(df[col])}")
                have.add(stored.lower())

    def _next_fid(self, table: str) -> int:
        row = self.conn.execute("SELECT seq FROM sqlite_sequence WHERE name = ?", (table,)).fetchone()
        top = self.conn.execute(f"SELECT MAX(fid) FROM {gpkg.quote(table)}").fetchone()[0]
        return max(row[0] if row else 0, top or 0) + 1

    def _insert_rows(self, table: str, df: pd.DataFrame, names: dict[str, str], extra: dict[str, list],
                     geom: list) -> None:
        self._ensure_columns(table, df, names)
        cols = ["geom"] + list(extra) + list(names.values())
        values = [geom] + list(extra.values()) + [gpkg.column_values(df[c]) for c in names]
        marks = ", ".join("?" * len(cols))
        self.conn.executemany(f"INSERT INTO {gpkg.quote(table)} ({', '.join(gpkg.quote(c) for c in cols)}) "
                              f"VALUES ({marks})", zip(*values))

    def _insert_fixes(self, table, add, iid, file_name, own_key) -> np.ndarray:
        fids = np.full(len(table), -1, np.int64)
        k = int(add.sum())
        if not k:
            return fids
        start = self._next_fid("fixes")
        fids[add] = np.arange(start, start + k)
        t = table[add].reset_index(drop=True)
        names = {c: _stored_name(c) for c in t.columns}
        has_pos = t["status"].isin(WITH_POSITION).to_numpy()
        lon = np.where(has_pos, t["lon"].to_numpy(float), np.nan)
        lat = np.where(has_pos, t["lat"].to_numpy(float), np.nan)
        self._insert_rows("fixes", t, names, {"fid": fids[add].tolist(), "import_id": [iid] * k,
                                              "source": [file_name] * k, "fix_key": list(own_key[add])},
                          gpkg.point_blobs(lon, lat))
        self._grow_bounds("fixes", lon, lat)
        return fids

    def _insert_regions(self, table, add, fids, iid) -> None:
        import shapely

        from dfkit.geometry import split_ring

        sel = add & np.isfinite(table["semi_major_m"].to_numpy(float)) & table["status"].isin(WITH_POSITION).to_numpy()
        if not sel.any():
            return
        t = table[sel].reset_index(drop=True)
        la, lo = ellipse_rings(t["lat"], t["lon"], t["semi_major_m"], t["semi_minor_m"], t["orientation_deg"],
                               RING_VERTICES)
        # counter-clockwise exterior rings (the rings are drawn clockwise from the major axis)
        polys = shapely.polygons(np.stack([lo[:, ::-1], la[:, ::-1]], axis=-1))
        geoms = np.asarray(shapely.multipolygons(polys[:, None]) if len(polys) else [], dtype=object)
        cross = np.flatnonzero((lo.max(axis=1) > 180.0) | (lo.min(axis=1) < -180.0))
        for i in cross:
            parts = split_ring(la[i], lo[i])
            geoms[i] = shapely.MultiPolygon([shapely.Polygon(p) for p in parts])
        k = len(t)
        t = t.assign(kind="ellipse", bounded=True)
        cols = {c: c for c in _REGION_COLUMNS if c in t.columns}
        self._insert_rows("regions", t, cols, {"fix_fid": fids[sel].tolist(), "import_id": [iid] * k},
                          gpkg.geometry_blobs(geoms))
        self._grow_bounds("regions", np.clip(lo, -180, 180), la)

    def _insert_likelihood_regions(self, fixes, add, fids, iid) -> None:
        """Likelihood regions, when the fixes carry them (``fixes.regions``: fix_id, geometry, bounded)."""
        from dfkit.export.shapes import likelihood_regions

        reg = likelihood_regions(fixes)
        if reg is None:
            return
        reg = reg[add[reg["fix_id"].to_numpy(np.int64)]].reset_index(drop=True)
        if not len(reg):
            return
        t = fixes.table.iloc[reg["fix_id"].to_numpy(np.int64)].reset_index(drop=True)
        geoms = lonlat_parts_many(reg["geometry"])
        t = t.assign(kind="likelihood", bounded=reg["bounded"].astype(bool).to_numpy(),
                     area_m2=np.nan if "area_m2" not in reg else reg["area_m2"].to_numpy(float))
        cols = {c: c for c in _REGION_COLUMNS if c in t.columns and c not in ("semi_major_m", "semi_minor_m",
                                                                             "orientation_deg")}
        self._insert_rows("regions", t, cols, {"fix_fid": fids[reg["fix_id"].to_numpy(np.int64)].tolist(),
                                               "import_id": [iid] * len(t)}, gpkg.geometry_blobs(geoms))
        b = np.array([g.bounds for g in geoms if g is not None])
        if len(b):
            self._grow_bounds("regions", b[:, [0, 2]].ravel(), b[:, [1, 3]].ravel())

    def _insert_bearings(self, bt, keep, fids, fix_of, iid, row_key, content_key, moment_key) -> None:
        if not keep.any():
            return
        b = bt[keep].reset_index(drop=True)
        names = {c: _stored_name(c) for c in b.columns if c != "fix_id"}
        k = len(b)
        self._insert_rows("bearings", b, names,
                          {"import_id": [iid] * k, "fix_fid": fids[fix_of[keep]].tolist(),
                           "row_key": list(row_key[keep]), "content_key": list(content_key[keep]),
                           "moment_key": list(moment_key[keep])},
                          gpkg.point_blobs(b["lon"].to_numpy(float), b["lat"].to_numpy(float)))
        self._grow_bounds("bearings", b["lon"].to_numpy(float), b["lat"].to_numpy(float))

    def _grow_bounds(self, table, lon, lat) -> None:
        lon = np.asarray(lon, float)
        lat = np.asarray(lat, float)
        ok = np.isfinite(lon) & np.isfinite(lat)
        if not ok.any():
            gpkg.touch(self.conn, table)
            return
        new = [lon[ok].min(), lat[ok].min(), lon[ok].max(), lat[ok].max()]
        old = self.conn.execute("SELECT min_x, min_y, max_x, max_y FROM gpkg_contents WHERE table_name = ?",
                                (table,)).fetchone()
        if old and None not in old:
            new = [min(new[0], old[0]), min(new[1], old[1]), max(new[2], old[2]), max(new[3], old[3])]
        gpkg.touch(self.conn, table, new)

    # ------------------------------------------------------------ reading

    def fixes(self, flt: SeasonFilter | None = None) -> pd.DataFrame:
        """The stored fixes the filter keeps, as a fix table (plus ``fid``, ``import_id``, ``source``)."""
        where, params = (flt or SeasonFilter()).where()
        cols = [c for c in gpkg.table_columns(self.conn, "fixes") if c not in ("geom", "fix_key")]
        q = f"SELECT {', '.join(gpkg.quote(c) for c in cols)} FROM fixes WHERE {where} ORDER BY time, fid"
        return self._frame("fixes", q, params)

    def bearings(self, fix_fids) -> pd.DataFrame:
        """The stored bearings of these fixes."""
        fix_fids = [int(f) for f in fix_fids]
        keys = ("geom", "row_key", "content_key", "moment_key")
        cols = [c for c in gpkg.table_columns(self.conn, "bearings") if c not in keys]
        parts = []
        for s in range(0, len(fix_fids), 500):
            chunk = fix_fids[s:s + 500]
            q = (f"SELECT {', '.join(gpkg.quote(c) for c in cols)} FROM bearings "
                 f"WHERE fix_fid IN ({', '.join('?' * len(chunk))}) ORDER BY fid")
            parts.append(self._frame("bearings", q, chunk))
        if not parts:
            return self._frame("bearings", f"SELECT {', '.join(gpkg.quote(c) for c in cols)} FROM bearings "
                                           "WHERE 0", [])
        return pd.concat(parts, ignore_index=True)

    def regions(self, fix_fids=None) -> pd.DataFrame:
        """Stored regions (with a shapely ``geometry`` column in lon/lat), of these fixes or all."""
        cols = [c for c in gpkg.table_columns(self.conn, "regions")]
        sel = ", ".join(gpkg.quote(c) for c in cols)
        if fix_fids is None:
            df = self._frame("regions", f"SELECT {sel} FROM regions ORDER BY fid", [])
        else:
            fix_fids = [int(f) for f in fix_fids]
            parts = [self._frame("regions", f"SELECT {sel} FROM regions WHERE fix_fid IN "
                                 f"({', '.join('?' * len(fix_fids[s:s + 500]))}) ORDER BY fid", fix_fids[s:s + 500])
                     for s in range(0, len(fix_fids), 500)]
            df = pd.concat(parts, ignore_index=True) if parts else self._frame(
                "regions", f"SELECT {sel} FROM regions WHERE 0", [])
        df["geometry"] = gpkg.geometries(df.pop("geom").tolist())
        return df

    def select(self, flt: SeasonFilter | None = None, *, with_bearings: bool = True) -> Fixes:
        """The stored fixes the filter keeps (and their bearings) as a :class:`~dfkit.locate.Fixes`,
        ready for :mod:`dfkit.export` writers and maps."""
        table = self.fixes(flt)
        bt = self.bearings(table["fid"]) if with_bearings else self.bearings([])
        if len(bt):
            pos = pd.Series(np.arange(len(table)), index=table["fid"].to_numpy())
            bt.insert(1, "fix_id", pos.reindex(bt["fix_fid"].to_numpy()).to_numpy())
        else:
            bt.insert(1, "fix_id", pd.Series([], dtype="int64"))
        return Fixes(table=table, bearings=bt, problems=[], notes=[], source=os.path.basename(self.path))

    def imports(self) -> pd.DataFrame:
        """One row per import, oldest first."""
        return self._frame("imports", "SELECT * FROM imports ORDER BY import_id", [])

    def problems(self, import_ids=None) -> pd.DataFrame:
        """Rejected rows and warnings recorded with each import, with the file name."""
        q = ("SELECT p.import_id, i.file_name, p.line, p.column_name, p.severity, p.message FROM problems p "
             "JOIN imports i USING (import_id)")
        params: list = []
        if import_ids is not None:
            ids = [int(i) for i in import_ids]
            q += f" WHERE p.import_id IN ({', '.join('?' * len(ids))})" if ids else " WHERE 0"
            params = ids
        return pd.read_sql_query(q + " ORDER BY p.import_id, p.line", self.conn, params=params)

    def changes(self) -> pd.DataFrame:
        """Fixes that differed from the stored ones at import, and what was done."""
        return self._frame("changes", "SELECT * FROM changes ORDER BY fid", [])

    def _frame(self, table, query, params) -> pd.DataFrame:
        df = pd.read_sql_query(query, self.conn, params=params)
        types = {r[1]: (r[2] or "").upper() for r in self.conn.execute(f"PRAGMA table_info({gpkg.quote(table)})")}
        for col in df.columns:
            kind = types.get(col, "")
            if kind == "DATETIME":
                df[col] = pd.to_datetime(df[col], utc=True, format="ISO8601")
            elif kind == "BOOLEAN" and df[col].notna().all():
                df[col] = df[col].astype(bool)
            elif kind == "TEXT":
                df[col] = df[col].astype(object).where(df[col].notna(), "")
        return df.rename(columns={c: c[len("sheet_"):] for c in df.columns
                                  if c.startswith("sheet_") and c[len("sheet_"):] in _RESERVED})

    def write_selection(self, path, flt: SeasonFilter | None = None) -> int:
        """Write the fixes the filter keeps, with their regions, bearings, imports and problems, as a new
        season store at ``path`` (replaced atomically). Returns the number of fixes written."""
        where, params = (flt or SeasonFilter()).where()
        with gpkg.atomic_database(path) as tmp:
            with SeasonStore.open(tmp, create=True) as out:
                oc = out.conn
                oc.execute("ATTACH DATABASE ? AS src", (self.path,))
                oc.execute("BEGIN IMMEDIATE")
                for t in ("fixes", "bearings"):      # the same added columns as the source
                    have = {c.lower() for c in gpkg.table_columns(oc, t)}
                    for r in self.conn.execute(f"PRAGMA table_info({gpkg.quote(t)})"):
                        if r[1].lower() not in have:
                            oc.execute(f"ALTER TABLE {gpkg.quote(t)} ADD COLUMN {gpkg.quote(r[1])} {r[2]}")
                oc.execute(f"CREATE TEMP TABLE picked AS SELECT fid FROM src.fixes WHERE {where}", params)
                n = oc.execute("SELECT COUNT(*) FROM picked").fetchone()[0]
                for t, cond in (("fixes", "fid IN (SELECT fid FROM picked)"),
                                ("regions", "fix_fid IN (SELECT fid FROM picked)"),
                                ("bearings", "fix_fid IN (SELECT fid FROM picked)"),
                                ("imports", "import_id IN (SELECT import_id FROM src.fixes WHERE fid IN "
                                            "(SELECT fid FROM picked))"),
                                ("problems", "import_id IN (SELECT import_id FROM src.fixes WHERE fid IN "
                                             "(SELECT fid FROM picked))"),
                                ("changes", "import_id IN (SELECT import_id FROM src.fixes WHERE fid IN "
                                            "(SELECT fid FROM picked))")):
                    cols = ", ".join(gpkg.quote(c) for c in gpkg.table_columns(self.conn, t))
                    oc.execute(f"INSERT INTO main.{t} ({cols}) SELECT {cols} FROM src.{t} WHERE {cond}")
                for t in ("fixes", "regions", "bearings"):
                    oc.execute("UPDATE main.gpkg_contents SET (min_x, min_y, max_x, max_y) = (SELECT min_x, min_y, "
                               "max_x, max_y FROM src.gpkg_contents WHERE table_name = ?) WHERE table_name = ?",
                               (t, t))
                oc.execute("COMMIT")
                oc.execute("DETACH DATABASE src")
        return int(n)


def _step_change(rows) -> str:
    """What differs where a stored bearing's observer position was written to another step than the sheet's now."""
    lines = rows["line"].tolist()
    r = rows.iloc[0]
    was = np.nan_to_num(pd.to_numeric(pd.Series([r["stored_e"], r["stored_n"]]), errors="coerce").to_numpy(float))
    now = np.nan_to_num(np.array([r["step_e"], r["step_n"]], float))

    def said(e, n):
        return "none (taken as exact)" if max(e, n) == 0 else f"{max(e, n):,.0f} m"

    return (f"line{'s' if len(lines) > 1 else ''} {', '.join(str(x) for x in lines[:6])}{' ...' if len(lines) > 6 else ''}: "
            f"the step {'their observer positions were' if len(lines) > 1 else 'its observer position was'} written "
            f"to is read as {said(*now)} now, {said(*was)} in the store (line {lines[0]}), so the stored fix's "
            "region and status did not allow for the same rounding")


def _stored_name(col: str) -> str:
    return f"sheet_{col}" if col.lower() in _RESERVED else col


def _empty_keys(table, file_name) -> np.ndarray:
    """Key of a fix with no usable bearing: its file name, tag and label (nothing else is left of it)."""
    import hashlib

    return np.array([hashlib.blake2b(f"e\x1f{file_name}\x1f{t}\x1f{f}".encode(), digest_size=16).hexdigest()
                     for t, f in zip(table["tag"].astype(str), table["fix"].astype(str))], dtype=object)


def _now_text() -> str:
    now = datetime.now(timezone.utc)
    return now.strftime("%Y-%m-%dT%H:%M:%S.") + f"{now.microsecond // 1000:03d}Z"


def _version() -> str:
    from dfkit import __version__

    return __version__
