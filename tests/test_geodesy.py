"""Small geodesy helpers against an outside reference: numpy's own float remainder."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from dfkit import geodesy


@pytest.mark.parametrize("period", [360.0, 2 * np.pi, 180.0, 1.0, 3.7])
def test_remainder_is_numpys_bit_for_bit(period):
    # geodesy.remainder replaces np.mod on the angles of the geodesic routines: every bit must be numpy's, signed
    # zeros, values a hair below zero (which numpy turns into the period itself), NaN among other values and both ends
    # of the range included, and outside the fast range (infinities, several periods, only NaN) numpy's answer too.
    rng = np.random.default_rng(3)
    tiny = np.array([0.0, -0.0, 5e-324, -5e-324, 1e-300, -1e-300, 1e-17, -1e-17, 1e-14, -1e-14])
    below = np.nextafter(period, 0.0)
    edges = np.concatenate([tiny, [below, -below, period, np.nextafter(2 * period, 0.0), 1.5 * period, -0.5 * period]])
    cases = [
        edges,
        rng.uniform(-period, 2 * period, 100_000),
        rng.uniform(-period, period, 100_000),
        np.concatenate([rng.uniform(-1.0, 1.0, 1000) * 1e-13 * period, rng.uniform(period, 2 * period, 1000)]),
        -period + rng.uniform(0.0, 1e-13, 1000) * period,
        rng.uniform(-3 * period, 3 * period, 1000),
        np.array([np.nan, 1.0]), np.array([-np.nan, -1.0, 0.5 * period]), np.array([np.nan]), np.array([np.inf, -1.0]), np.array([-period, 0.5]), np.array([2 * period]),
        np.array([]), np.array(-0.0), rng.uniform(-period, period, (30, 7)),
    ]
    for x in cases:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            want = np.mod(x, period)
            got = geodesy.remainder(x, period)
        assert got.shape == want.shape
        assert got.tobytes() == want.tobytes(), x.ravel()[:4]
