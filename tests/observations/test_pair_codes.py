"""Fix numbering by (tag, label) pairs, held to a plain dictionary that numbers pairs in order of first appearance."""

import numpy as np
import pytest

from dfkit.observations.grouping import pair_codes


def _reference(tag, fix, mask):
    seen, out = {}, []
    for t, f, m in zip(tag, fix, mask):
        out.append(seen.setdefault((t, f), len(seen)) if m else -1)
    return out


@pytest.mark.parametrize("tags", [["", "", "", "", "", ""], ["a", "a", "a", "a", "a", "a"],
                                  ["a", "b", "a", "b", "", "a"]])
@pytest.mark.parametrize("mask", [[True] * 6, [True, False, True, True, False, True], [False] * 6])
def test_codes_follow_first_appearance(tags, mask):
    fix = ["B", "A", "B", "C", "A", "C"]
    got = pair_codes(np.array(tags, object), np.array(fix, object), np.array(mask))
    assert got.tolist() == _reference(tags, fix, mask)
    assert got.dtype == np.int64


def test_a_label_left_out_does_not_take_a_number():
    # the first label seen is masked: the next label seen must still be fix 0
    tag = np.array(["", "", ""], object)
    fix = np.array(["X", "Y", "X"], object)
    assert pair_codes(tag, fix, np.array([False, True, True])).tolist() == [-1, 0, 1]


def test_no_rows():
    assert pair_codes(np.zeros(0, object), np.zeros(0, object)).tolist() == []
