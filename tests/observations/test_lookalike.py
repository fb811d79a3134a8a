"""Tags and fix labels spelled two ways: kept apart (a label's case may mean something), and said with line numbers."""

from dfkit import read_bearings

ROWS = [(47.913286, -91.796515, 190), (47.898125, -91.784195, 280), (47.884787, -91.808231, 20),
        (47.903075, -91.812569, 110)]


def sheet(write_sheet, column, labels):
    body = "\n".join(f"{lab},{la},{lo},{b},2026-06-01T08:0{i}:00-05:00"
                     for i, (lab, (la, lo, b)) in enumerate(zip(labels, ROWS)))
    return read_bearings(write_sheet(f"{column},lat,lon,bearing,time\n{body}\n"))


def warned(b, column):
    return [(p.line, p.message) for p in b.problems if p.severity == "warning" and p.column == column]


def test_tag_spellings_of_one_frequency_are_said_and_kept_apart(write_sheet):
    b = sheet(write_sheet, "tag", ["150.412", "150.4120", "150.412 MHz", "150.412"])
    assert len(b.fix_index["tag"].unique()) == 3                  # not merged
    said = warned(b, "tag")
    assert [line for line, _ in said] == [3, 4]
    assert "'150.4120' (line 3) reads as the same frequency as '150.412' (line 2): kept apart" in said[0][1]
    assert "'150.412 MHz' (line 4)" in said[1][1]


def test_other_frequencies_are_not_said(write_sheet):
    b = sheet(write_sheet, "tag", ["150.412", "150.41", "150.421", "151.412"])
    assert warned(b, "tag") == []


def test_fix_labels_differing_in_case_or_leading_zeros_are_said_and_kept_apart(write_sheet):
    b = sheet(write_sheet, "fix", ["F1", "F1 ", "f1", "F01"])     # 'F1 ' is 'F1' (cells are trimmed)
    assert sorted(b.fix_index["fix"]) == ["F01", "F1", "f1"]
    said = dict(warned(b, "fix"))
    assert set(said) == {4, 5}
    assert "'f1' (line 4) differs only in letter case from 'F1' (line 2)" in said[4]
    assert "'F01' (line 5) differs only in leading zeros from 'F1' (line 2)" in said[5]


def test_distinct_labels_and_one_label_in_two_tags_are_not_said(write_sheet):
    b = sheet(write_sheet, "fix", ["F1", "F10", "F2", "F1"])
    assert warned(b, "fix") == []
    body = "\n".join(f"{t},{lab},{la},{lo},{bb}" for t, lab, (la, lo, bb) in
                     zip(["A", "A", "B", "B"], ["F1", "F1", "f1", "f1"], ROWS))
    b = read_bearings(write_sheet(f"tag,fix,lat,lon,bearing\n{body}\n", "two.csv"))
    assert warned(b, "fix") == [] and warned(b, "tag") == []
