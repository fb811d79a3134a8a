"""Solving fixes in chunks on several processes or threads, with the same results as one job.

Every fix is solved from its own bearings alone (:func:`dfkit.locate.locate` works fix by fix, vectorised over
all of them), so the fixes can be cut into chunks by ``fix_id``, each chunk located on its own, and the pieces
put back in order: the table, the bearings (in the sheet's order) and the likelihood regions are those one job
gives, bit for bit (``tests/test_parallel.py`` writes both and compares the bytes).

Threads (the default) share the memory and overlap wherever numpy and pyproj release the interpreter lock,
which is most of the work: on 100,000 fixes two threads took 3.0-4.2 s of wall time against 5.2-7.1 s for one
job, while two forked processes took 5.8-8.2 s (each chunk's bearings and results are pickled across);
measured in DEVELOPERS.md, "Speed".
"""

from __future__ import annotations

import os
from concurrent.futures import Executor, ProcessPoolExecutor, ThreadPoolExecutor
from dataclasses import fields, replace

import numpy as np
import pandas as pd

from dfkit.locate.fixes import Fixes
from dfkit.regions import PER_BEARING_FIELDS, SHARED_FIELDS
from dfkit.observations import Bearings

#: Fewest fixes in a chunk: below this the cost of handing a chunk over outweighs solving it (a choice of ours,
#: from the measurements in DEVELOPERS.md: a chunk of 5,000 fixes takes about a quarter of a second).
MIN_CHUNK_FIXES = 5_000

#: Ways to run the chunks.
EXECUTORS = ("threads", "processes")


def check_jobs(jobs) -> int:
    """``jobs`` as a positive int; 0 means one per processor this process may use."""
    if isinstance(jobs, bool) or not isinstance(jobs, (int, np.integer)) or jobs < 0:
        raise ValueError(f"jobs={jobs!r} must be a whole number of at least 1 (0: one per processor)")
    if jobs == 0:
        return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))
    return int(jobs)


def chunks(bearings: Bearings, jobs: int, min_fixes: int = MIN_CHUNK_FIXES) -> list[tuple[int, int]]:
    """Ranges [lo, hi) of fix ids: ``jobs`` chunks of equal size, none smaller than ``min_fixes`` (one chunk
    when there are few fixes)."""
    m = len(bearings.fix_index)
    k = max(1, min(jobs, m // max(min_fixes, 1)))
    edges = np.linspace(0, m, k + 1).round().astype(int)
    return [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]


def split(bearings: Bearings, lo: int, hi: int) -> tuple[Bearings, np.ndarray]:
    """The fixes with ids in [lo, hi) as a :class:`Bearings` of their own (ids from 0), and the rows of the
    original table it holds."""
    return subset(bearings, np.arange(lo, hi))


def subset(bearings: Bearings, ids) -> tuple[Bearings, np.ndarray]:
    """The fixes ``ids`` (ascending) as a :class:`Bearings` of their own (ids from 0 in that order), and the rows of
    the original table it holds (in the table's order)."""
    t = bearings.table
    fid = t["fix_id"].to_numpy(dtype=np.int64)
    ids = np.asarray(ids, np.int64)
    new = np.full(len(bearings.fix_index), -1, np.int64)
    new[ids] = np.arange(len(ids))
    rows = np.flatnonzero(new[fid] >= 0)
    table = t.iloc[rows].reset_index(drop=True)
    table["fix_id"] = new[fid[rows]]
    fix_index = bearings.fix_index.iloc[ids].reset_index(drop=True)
    fix_index.index.name = bearings.fix_index.index.name
    return replace(bearings, table=table, fix_index=fix_index), rows


def _solve_chunk(args):
    solve, chunk, kwargs = args
    return solve(chunk, **kwargs)


def _executor(use: str, jobs: int) -> Executor:
    if use == "threads":
        return ThreadPoolExecutor(max_workers=jobs)
    import multiprocessing

    methods = multiprocessing.get_all_start_methods()
    # fork: the workers start with dfkit already imported (spawn would import it again in each)
    ctx = multiprocessing.get_context("fork" if "fork" in methods else None)
    return ProcessPoolExecutor(max_workers=jobs, mp_context=ctx)


def locate_in_chunks(bearings: Bearings, solve, *, jobs: int, use: str = "threads", min_fixes: int = MIN_CHUNK_FIXES,
                     progress=None, **kwargs) -> Fixes:
    """``solve`` (:func:`dfkit.locate.core.locate_chunk`) on chunks of fixes in ``jobs`` workers; the same
    :class:`Fixes` as one call on all of them. The sheet-wide checks are the caller's, on the result.

    Parameters
    ----------
    bearings : Bearings
    solve : callable
        ``solve(bearings, progress=None, **kwargs) -> Fixes`` for a set of fixes (picklable for processes).
    jobs : int
        Workers (0: one per processor). With one chunk (few fixes) no worker is started.
    use : {'threads', 'processes'}
    min_fixes : int
        Fewest fixes in a chunk.
    progress : callable, optional
        Called with a short text when the work is handed out and as chunks finish.
    kwargs
        The options of ``solve``.
    """
    if use not in EXECUTORS:
        raise ValueError(f"use={use!r} is not one of {', '.join(map(repr, EXECUTORS))}")
    jobs = check_jobs(jobs)
    say = progress or (lambda text: None)
    parts = chunks(bearings, jobs, min_fixes)
    if len(parts) == 1:
        return solve(bearings, progress=progress, **kwargs)
    pieces = [split(bearings, lo, hi) for lo, hi in parts]
    say(f"solving {len(bearings.fix_index)} fixes in {len(parts)} chunks on {jobs} {use}")
    with _executor(use, jobs) as ex:
        results = []
        for k, fx in enumerate(ex.map(_solve_chunk, [(solve, chunk, kwargs) for chunk, _ in pieces])):
            results.append(fx)
            say(f"chunk {k + 1} of {len(parts)} done")
    return merge(bearings, results, [rows for _, rows in pieces], [lo for lo, _ in parts])


def merge(bearings: Bearings, results: list[Fixes], rows: list[np.ndarray], offsets: list[int]) -> Fixes:
    """Put chunks' :class:`Fixes` back together: fixes in id order, bearings in the original table's order."""
    table = pd.concat([r.table for r in results], ignore_index=True)
    bt = pd.concat([r.bearings for r in results], ignore_index=True)
    bt["fix_id"] = np.concatenate([r.bearings["fix_id"].to_numpy(dtype=np.int64) + lo
                                   for r, lo in zip(results, offsets)]) if len(bt) else bt["fix_id"]
    order = np.argsort(np.concatenate(rows), kind="stable")
    bt = bt.iloc[order].reset_index(drop=True)
    bt.index = bearings.table.index
    lik = None
    if all(r.likelihood is not None for r in results):
        lik = _merge_regions([r.likelihood for r in results], [len(r.table) for r in results], order)
    az = None
    if all(r.azimuth_deg is not None for r in results):
        az = np.concatenate([r.azimuth_deg for r in results])[order]
    first = results[0]
    return replace(first, table=table, bearings=bt, problems=list(bearings.problems), notes=list(first.notes),
                   likelihood=lik, _regions=None, azimuth_deg=az)




def _merge_regions(parts, sizes, order):
    """Chunks' likelihood regions as one: per-fix fields in fix order, per-bearing fields in the sheet's order
    (``order``), ``g`` shifted to the whole's fix ids."""
    first = parts[0]
    out = {}
    offsets = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    m = [len(p.fix_lat) for p in parts]
    n = [len(p.g) for p in parts]
    for f in fields(first):
        values = [getattr(p, f.name) for p in parts]
        if f.name in SHARED_FIELDS or not isinstance(values[0], np.ndarray):
            out[f.name] = values[0]
            continue
        if f.name == "g":
            values = [v + lo for v, lo in zip(values, offsets)]
        per_bearing = f.name in PER_BEARING_FIELDS or all(len(v) == b != a for v, a, b in zip(values, m, n))
        joined = np.concatenate(values)
        out[f.name] = joined[order] if per_bearing else joined
    return type(first)(**out)
