"""The terminal table of ``cracktip reduce`` (reports/table.py)."""

from __future__ import annotations

import textwrap
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from reduce.pipeline import reduce_sheet
from reports.table import CAUTION, _wrap, summary_table

ROOT = Path(__file__).resolve().parents[1]

words = st.lists(st.text("abcxyz0123456789.,:()|/-_", min_size=1, max_size=40), max_size=40)


@settings(max_examples=300, deadline=None)
@given(words, st.integers(5, 100))
def test_wrap_keeps_every_character_within_the_width(ws, width):
    text = " ".join(ws)
    lines = _wrap(text, width)
    assert all(0 < len(line) <= width for line in lines)
    assert "".join(lines).replace(" ", "") == text.replace(" ", "")
    if all(len(w) <= width for w in ws):  # then it is the standard library's wrap
        assert lines == textwrap.wrap(text, width, break_on_hyphens=False)


def test_demo_table_fits_and_carries_the_caution():
    results = [r for r, _, _ in reduce_sheet(ROOT / "sample_data" / "campaign.csv")]
    table = summary_table(results, "ASTM E399")
    assert all(len(line) <= 100 for line in table.splitlines())
    flat = " ".join(table.split())
    assert CAUTION in flat
    for r in results:
        assert r.specimen in table
