"""The CSV writer (piezo.io.tables): formula cells neutralised, numbers kept."""

from __future__ import annotations

import csv
import io

from hypothesis import given
from hypothesis import strategies as st

from piezo.io.tables import csv_text, safe_cell

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


@given(st.text(max_size=60))
def test_no_cell_is_a_formula(text):
    cell = safe_cell(text)
    try:
        float(cell)
        is_number = True
    except ValueError:
        is_number = False
    # OWASP CSV-injection guidance: a cell starting with one of these is evaluated by
    # spreadsheets, unless it is a plain number.
    assert is_number or not cell.startswith(FORMULA_START)
    assert cell.removeprefix("'") == text or cell == text


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_numbers_stay_numbers(value):
    assert float(safe_cell(repr(value))) == value
    assert float(safe_cell(value)) == value


@given(st.lists(st.lists(st.text(max_size=20), min_size=1, max_size=4), max_size=5))
def test_rows_read_back(rows):
    text = csv_text(["a", "b", "c", "d"], rows)
    back = list(csv.reader(io.StringIO(text)))
    assert back[0] == ["a", "b", "c", "d"]
    assert back[1:] == [[safe_cell(c) for c in row] for row in rows]


def test_comments_cannot_break_out():
    text = csv_text(["a"], [["1"]], comments=["unit\n=1+1"])
    assert text.splitlines() == ["# unit =1+1", "a", "1"]
