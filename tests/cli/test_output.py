"""Tests of :mod:`piezo.cli.output`: what reaches the terminal."""

from __future__ import annotations

import io

from piezo.cli import output


def test_a_progress_bar_shows_a_file_name_s_control_characters_as_escapes(monkeypatch):
    # The bar names the file being analysed; a name holding "clear screen" (ESC [ 2 J)
    # must be drawn as text. rich's own drawing uses other sequences (ESC [ 2 K erases a
    # line), so the clear-screen sequence can only come from the name.
    screen = io.StringIO()
    terminal = output._PlainConsole(file=screen, force_terminal=True, width=80)
    monkeypatch.setattr(output, "err_console", terminal)
    monkeypatch.setattr(output, "_interactive", lambda: True)
    with output.progress("Analysing a\x1b[2J.wav", 10) as advance:
        advance(5)
    drawn = screen.getvalue()
    assert "Analysing a\\x1b[2J.wav" in drawn
    assert "\x1b[2J" not in drawn


def test_table_cells_and_plain_prints_show_control_characters_as_escapes():
    from rich.table import Table

    screen = io.StringIO()
    terminal = output._PlainConsole(file=screen, width=80)
    table = Table()
    table.add_column("unit")
    table.add_row("S/N \x1b]0;title\x07 [b]x")  # an OSC title change, markup-like text
    terminal.print(table)
    terminal.print("two\nlines\tand a tab")
    drawn = screen.getvalue()
    assert "\x1b" not in drawn and "\x07" not in drawn
    assert "S/N \\x1b]0;title\\x07 [b]x" in drawn
    assert "two\nlines\\tand a tab" in drawn  # line breaks of our own layout stay
