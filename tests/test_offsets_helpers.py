"""The pieces the per-fix offset test is built from, each against an outside reference: numpy's pseudo-inverse and
matrix rank, IEEE division, pandas' own string methods, and the score and information of the module docstring of
dfkit.locate.offsets written out here with numpy (Weisberg, *Applied Linear Regression*, 3rd ed., Wiley 2005, sect.
3.4 [from memory]: the added-variable score U = sum_G r w - c' M^-1 q and information V = sum_G w^2 - c' M^-1 c).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from dfkit.locate import offsets
from dfkit.locate.offsets import _blocks, _pinv, _stripped_text, group_stats


@pytest.mark.parametrize("a", [3.7, 1e-300, 2.5e8, 0.0, -2.0, np.nan, np.inf])
def test_one_dimensional_pseudo_inverse_is_the_reciprocal_or_nothing(a):
    Gi, rank = _pinv(np.array([[a]]))
    if np.isfinite(a) and a > 0:
        assert rank == 1 and Gi[0, 0] == 1.0 / a          # IEEE division: exact
    else:
        assert rank == 0 and Gi[0, 0] == 0.0


@pytest.mark.parametrize("L, r", [(1, 1), (2, 2), (2, 1), (3, 2), (4, 4)])
def test_pseudo_inverse_is_numpys(L, r):
    rng = np.random.default_rng(10 * L + r)
    X = rng.normal(size=(L, r))
    I = X @ X.T
    Gi, rank = _pinv(I)
    assert rank == np.linalg.matrix_rank(I)
    assert np.allclose(Gi, np.linalg.pinv(I, hermitian=True), rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("values", [
    [" A", "B ", "A", "b", " B", "", "nan"] * 20,
    ["kim", 3, 4.5, "kim ", True] * 20,
    [1, 1.0, True, " a "] * 20,               # equal as values, not as texts
    ["A", None, " B", np.nan] * 20,          # missing cells: pandas' own path
    ["x"] * 3,
])
@pytest.mark.parametrize("dtype", [object, "string"])
def test_observer_names_are_stripped_as_pandas_strips_them(values, dtype):
    try:
        col = pd.Series(values, dtype=dtype)
    except (TypeError, ValueError):
        pytest.skip("pandas does not hold these values in this dtype")
    want = col.astype(str).str.strip().to_numpy(dtype=object)
    got = _stripped_text(col)
    assert got.dtype == object and list(got) == list(want)
    assert all(type(x) is type(y) for x, y in zip(got, want))


def _sheet(rng, m=40, k=6):
    g = np.repeat(np.arange(m), k)
    table = pd.DataFrame({"line": np.arange(len(g)) + 2,
                          "observer": rng.choice(["A", "B ", " C"], len(g)),
                          "team": rng.choice(["red", "blue"], len(g))})
    az = rng.uniform(0, 360, len(g))
    rng_m = rng.uniform(300, 3000, len(g))
    sd = rng.uniform(2, 6, len(g))
    res = rng.normal(0, 1, len(g)) * sd
    use = rng.uniform(size=len(g)) > 0.1
    return table, g, m, res, az, rng_m, sd, use


# bearings summed a run of whole fixes at a time (runs of about 25 or 7 bearings here) or in one pass
CHUNKS = [None, 25, 7]


def _stats_in_runs(monkeypatch, chunk, seed, min_group):
    """An invented sheet (:func:`_sheet`) and its group_stats, summed in runs of ``chunk`` bearings (None: one pass)."""
    if chunk:
        monkeypatch.setattr(offsets, "CHUNK_BEARINGS", chunk)
    sheet = _sheet(np.random.default_rng(seed))
    return sheet, group_stats(*sheet, min_group=min_group, columns=["observer", "team"])


@pytest.mark.parametrize("chunk", CHUNKS)
def test_pair_lines_are_the_lines_of_each_fix_and_label(chunk, monkeypatch):
    (table, g, m, res, az, d, sd, use), st = _stats_in_runs(monkeypatch, chunk, seed=3, min_group=2)
    assert len(st.lines) == len(st.fix) > 0
    for q in range(len(st.fix)):
        col = st.columns[st.column[q]]
        lab = table[col].str.strip().to_numpy()
        want = table["line"].to_numpy()[(g == st.fix[q]) & (lab == st.label[q]) & use].tolist()
        assert st.lines[q] == want
    assert list(st.lines)[-1] == st.lines[-1]


@pytest.mark.parametrize("chunk", CHUNKS)
def test_per_fix_blocks_hold_the_score_and_information_of_each_label(chunk, monkeypatch):
    (table, g, m, res, az, d, sd, use), st = _stats_in_runs(monkeypatch, chunk, seed=4, min_group=1)
    # the same quantities written out with numpy: whitened gradient x, residual r/s, w = 1/s
    s = np.radians(sd)
    a = np.radians(az)
    x = np.stack([-np.cos(a), np.sin(a)], axis=1) / (d * s)[:, None]
    z = np.radians(res) / s
    pairs = np.flatnonzero(np.isfinite(st.V))
    blocks = _blocks(st, pairs, per_fix=True)
    assert len(blocks) == len({(int(st.fix[p]), int(st.column[p])) for p in pairs})
    for key, sel, labs, li, S, I in blocks:
        i, c = divmod(int(key), len(st.columns))
        col = st.columns[c]
        assert list(labs) == sorted(labs)
        mine = (g == i) & use
        M = x[mine].T @ x[mine]
        q = x[mine].T @ z[mine]
        lab = table[col].str.strip().to_numpy()
        C = np.stack([((lab == L) & mine) / s @ x for L in labs])           # c_l = sum_l x w
        U = np.array([(((lab == L) & mine) / s) @ z for L in labs]) - C @ np.linalg.solve(M, q)
        V = np.diag([(((lab == L) & mine) / s ** 2).sum() for L in labs]) - C @ np.linalg.solve(M, C.T)
        assert np.allclose(S, U, rtol=1e-9, atol=1e-9 * np.abs(U).max())
        assert np.allclose(I, V, rtol=1e-9, atol=1e-9 * np.abs(V).max())
        assert np.array_equal(I, I.T)


@pytest.mark.parametrize("chunk", [25, 7])
@pytest.mark.parametrize("shuffled", [False, True])
def test_sums_by_runs_of_fixes_are_those_of_one_pass(chunk, shuffled, monkeypatch):
    """Each fix's bearings are summed in one run, in their order: every field the same bit for bit (fixes with no
    usable bearing, unnamed labels and bearings out of fix order included)."""
    rng = np.random.default_rng(5)
    table, g, m, res, az, d, sd, use = _sheet(rng)
    table.loc[::7, "observer"] = ""
    use[g == 3] = False
    res[::11] = np.nan
    if shuffled:
        order = rng.permutation(len(g))
        table, g, res, az, d, sd, use = (table.iloc[order].reset_index(drop=True), g[order], res[order], az[order],
                                         d[order], sd[order], use[order])
    args = (table, g, m, res, az, d, sd, use)
    whole = group_stats(*args, min_group=1, columns=["observer", "team"])
    monkeypatch.setattr(offsets, "CHUNK_BEARINGS", chunk)
    runs = group_stats(*args, min_group=1, columns=["observer", "team"])
    assert shuffled or len(offsets._fix_runs(g, m)) > 1
    for name in ("fix", "column", "label", "n", "U", "V", "B", "shift", "n_fix", "rss1", "testable", "ce", "cn", "Mi",
                 "rss0", "n_used"):
        a, b = getattr(whole, name), getattr(runs, name)
        assert a.dtype == b.dtype and a.shape == b.shape, name
        assert np.array_equal(a, b, equal_nan=a.dtype.kind == "f"), name
    assert list(whole.lines) == list(runs.lines)
