"""Notices grouped and printed whole: warnings first and numbered, notes after."""

from __future__ import annotations

from tomo.core.notices import NOTE, WARNING, Notice, group_notices, notice_lines
from tomo.layered.codes import HINTS, NOTE_CODES, TOPICS, notice


def test_every_code_has_a_topic_and_notes_are_known_codes():
    assert set(TOPICS) == set(HINTS)
    assert NOTE_CODES <= set(HINTS)


def test_levels_come_from_the_code():
    assert notice("outliers-left-out", "x").level == WARNING
    assert notice("branch-few-picks", "x").level == NOTE


def test_repeats_are_grouped_and_nothing_is_cut():
    few = [notice("branch-few-picks", f"shot at x = {x:g} m: branch 1 rests on only 2 picks", shot_x=x)
           for x in (0.0, 10.0, 20.0)]
    out = [notice("outliers-left-out", "shot at x = 5 m: 1 outlier pick(s) left out of the fit", shot_x=5.0)]
    groups = group_notices(few + out)
    assert [g.level for g in groups] == [WARNING, NOTE]  # warnings first, whatever the order made
    assert len(groups[1].notices) == 3 and "(3 times)" in groups[1].heading()
    lines = notice_lines(few + out)
    assert lines[0].startswith("1 warning(s) to act on, 1 note(s)")
    assert lines[1].startswith("warning W1: shot at x = 5 m") and lines[2].startswith("  what to do:")
    for n in few:
        assert any(n.message in line for line in lines)


def test_old_records_read_as_warnings_and_keep_their_text():
    n = Notice.from_dict({"message": "something from an older file"})
    assert n.level == WARNING and n.code == "unclassified"
    assert notice_lines([n])[1] == "warning W1: something from an older file"
