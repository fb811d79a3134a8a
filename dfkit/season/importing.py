"""From a sheet to the season store: read, solve, and store as one import."""

from __future__ import annotations

import dataclasses
import os

from dfkit.locate import locate
from dfkit.observations import ReadOptions, read_bearings
from dfkit.policy import WILD_SHARE
from dfkit.season.keys import file_hash
from dfkit.season.store import ImportReport, SeasonStore


def add_sheet(store: SeasonStore, sheet, options: ReadOptions | None = None, *, method: str = "mle",
              level: float = 0.95, replace: bool = False, progress=None, jobs: int = 1,
              wild_share: float = WILD_SHARE, wild_rate: str = "sheet", **read_kwargs) -> ImportReport:
    """Read a sheet, solve its fixes and store them as one import: the Python form of ``dfkit season add``.

    Parameters
    ----------
    store : SeasonStore
        Open store (:meth:`SeasonStore.open`).
    sheet : path
        The bearing sheet.
    options : ReadOptions, optional
        Reading options; keyword arguments override its fields (``north='magnetic'``, ``sd=5`` ...).
    method, level, wild_share, wild_rate
        As for :func:`dfkit.locate.locate`.
    replace : bool
        Replace stored fixes that this sheet changes (otherwise they are reported and kept).
    jobs : int
        Processes to solve the fixes on (as :func:`dfkit.locate.locate`).

    Returns
    -------
    ImportReport
    """
    say = progress or (lambda text: None)
    opts = options or ReadOptions()
    if read_kwargs:
        opts = dataclasses.replace(opts, **read_kwargs)
    say("reading")
    bearings = read_bearings(sheet, opts)
    fixes = locate(bearings, method=method, level=level, progress=progress, jobs=jobs, wild_share=wild_share,
                   wild_rate=wild_rate)
    record = {k: v for k, v in dataclasses.asdict(opts).items()}
    for name in ("stations", "track"):
        value = record.get(name)
        if isinstance(value, (str, os.PathLike)) and os.path.isfile(value):
            record[name] = {"file": os.path.basename(os.fspath(value)), "sha256": file_hash(value)}
        elif value is not None:
            record[name] = str(value)
    record.update(method=method, level=level, wild_share=wild_share, wild_rate=wild_rate)
    path = os.fspath(sheet)
    return store.add(fixes, file_name=os.path.basename(path), file_path=os.path.abspath(path),
                     file_sha256=file_hash(path), options=record, n_rows=bearings.n_rows, replace=replace,
                     progress=progress)
