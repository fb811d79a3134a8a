"""Giving freed memory back after a large read: it runs where the C library is glibc and is silently skipped
elsewhere; it never fails and changes no value (how much it gives back is measured in benchmarks/, not here)."""

import os

import numpy as np
import pytest

from dfkit.io.heap import release_freed_memory


def _glibc():
    try:
        return bool(os.confstr("CS_GNU_LIBC_VERSION"))
    except (ValueError, OSError):
        return False


def test_runs_on_glibc_and_reports_it():
    assert release_freed_memory() is _glibc()


def test_live_arrays_keep_their_values():
    a = np.arange(1_000_000, dtype=float)
    junk = [np.ones(200_000) for _ in range(20)]
    del junk
    release_freed_memory()
    assert a[123_456] == 123_456.0 and a.sum() == 999_999 * 1_000_000 / 2


@pytest.mark.skipif(not hasattr(os, "confstr"), reason="os.confstr is POSIX only")
def test_without_glibc_it_does_nothing(monkeypatch):
    monkeypatch.setattr(os, "confstr", lambda name: None)
    assert release_freed_memory() is False
