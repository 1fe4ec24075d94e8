"""The terminal text: markup, escaping, wrapping, tables, colours.

Outside references: the standard library's ``textwrap`` (line breaking), the ECMA-48
select-graphic-rendition codes (1 bold, 31 red, 33 yellow; common practice, from memory),
and the ``NO_COLOR`` convention (no colour when the variable is set; common practice).
"""

from __future__ import annotations

import io
import os
import textwrap

import pytest
from hypothesis import given
from hypothesis import strategies as st

from pipeline.terminal import Styled, Table, Terminal, _breaks, escape, plain_text

WORDS = st.lists(st.text(alphabet="abcxyz-/.", min_size=1, max_size=15), min_size=1,
                 max_size=30)


@given(st.text())
def test_escaped_text_is_shown_as_it_is(text):
    assert Styled.parse(escape(text)).plain == text


@given(st.text(alphabet="[]/\\ abold", max_size=40))
def test_any_text_parses_without_error_and_loses_no_plain_character(text):
    # a bracket naming no style stays; only style tags and escapes are consumed
    plain = Styled.parse(text).plain
    assert len(plain) <= len(text)


def test_styles_become_ecma48_codes_only_with_colour():
    styled = Styled.parse("[bold]a[/bold] [red]b[/red] [bold yellow]c[/] [nostyle]")
    assert styled.plain == "a b c [nostyle]"
    coloured = styled.render(colour=True)
    assert "\x1b[1ma\x1b[0m" in coloured
    assert "\x1b[31mb\x1b[0m" in coloured
    assert "\x1b[1;33mc\x1b[0m" in coloured
    assert styled.render(colour=False) == "a b c [nostyle]"


@given(WORDS, st.integers(min_value=15, max_value=40))
def test_line_breaks_match_textwrap(words, width):
    # every word fits a line: both break greedily between words
    text = " ".join(words)
    ours = [text[a:b] for a, b in _breaks(text, width)]
    assert ours == textwrap.wrap(text, width, break_on_hyphens=False)


@given(WORDS, st.integers(min_value=1, max_value=40))
def test_a_word_longer_than_a_line_is_cut_on_lines_of_its_own(words, width):
    # (textwrap starts cutting it at the end of the line before; here it starts a line)
    text = " ".join(words)
    lines = [text[a:b] for a, b in _breaks(text, width)]
    assert all(0 < len(line) <= width for line in lines)
    assert "".join(lines).replace(" ", "") == "".join(words)


@given(WORDS, st.integers(min_value=1, max_value=40))
def test_uncut_lines_keep_every_word_whole(words, width):
    text = " ".join(words)
    lines = [text[a:b] for a, b in _breaks(text, width, cut=False)]
    assert " ".join(lines).split() == words
    assert all(len(line) <= width or " " not in line for line in lines)


def _table(rows):
    t = Table("T")
    t.add_column("name")
    t.add_column("value", justify="right")
    t.add_column("note")
    for r in rows:
        t.add_row(*r)
    return t


def test_table_aligns_columns_and_keeps_every_cell():
    rows = [("alpha", "1", "first"), ("b", "22.5", "[red]second[/red]")]
    text = plain_text(lambda out: out.print(_table(rows)), 80).splitlines()
    assert text[:2] == ["", "T"]
    header, rule, *body = text[2:]
    assert header.split() == ["name", "value", "note"]
    assert rule.split() == ["-----", "-----", "------"]
    assert body[0].split() == ["alpha", "1", "first"]
    assert body[1].split() == ["b", "22.5", "second"]
    # right-justified numbers end in the same column
    assert body[0].index("1") + 1 == body[1].index("22.5") + 4


@given(st.lists(st.tuples(st.text(alphabet="ab ", max_size=30),
                          st.text(alphabet="0123456789", max_size=8),
                          st.text(alphabet="xy ", max_size=40)), max_size=5),
       st.integers(min_value=30, max_value=120))
def test_table_fits_the_width_when_wrapping_allows_and_keeps_the_words(rows, width):
    text = plain_text(lambda out: out.print(_table(rows)), width)
    lines = text.splitlines()
    assert all(len(line) <= width for line in lines)
    words = sorted(w for r in rows for cell in r for w in cell.split())
    shown = sorted(w for line in lines[4:] for w in line.split())
    # a wrapped cell may split a long word across lines, never lose a character
    assert "".join(shown).count("a") == "".join(words).count("a")
    assert "".join(shown).count("x") == "".join(words).count("x")


def test_sections_split_row_groups():
    t = _table([("a", "1", "")])
    t.add_section()
    t.add_row("b", "2", "")
    lines = plain_text(lambda out: out.print(t), 80).splitlines()
    assert lines[3] == lines[5]  # the rule under the header, then between the groups


def test_colour_follows_no_color_and_force_color(monkeypatch):
    class Tty(io.StringIO):
        def isatty(self):
            return True

    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.delenv("FORCE_COLOR", raising=False)
    monkeypatch.setenv("TERM", "xterm")
    assert Terminal(Tty()).colour
    assert not Terminal(io.StringIO()).colour
    monkeypatch.setenv("NO_COLOR", "1")
    assert not Terminal(Tty()).colour
    monkeypatch.delenv("NO_COLOR")
    monkeypatch.setenv("FORCE_COLOR", "1")
    assert Terminal(io.StringIO()).colour


def test_width_from_columns_or_80_off_a_terminal(monkeypatch):
    monkeypatch.setenv("COLUMNS", "123")
    assert Terminal(io.StringIO()).width == 123
    monkeypatch.delenv("COLUMNS")
    assert Terminal(io.StringIO()).width == 80
    assert Terminal(io.StringIO(), width=50).width == 50


def test_long_lines_wrap_between_words_and_paths_stay_whole():
    out = io.StringIO()
    path = "/a/" + "b" * 60 + "/report.html"
    Terminal(out, width=40).print(f"[bold]report:[/bold] {escape(path)} and some words after")
    lines = out.getvalue().splitlines()
    assert path in lines
    assert all(len(line) <= 40 for line in lines if line != path)


def test_rows_longer_than_the_header_are_refused():
    t = Table()
    t.add_column("a")
    with pytest.raises(ValueError, match="2 cells for 1 columns"):
        t.add_row("x", "y")


def test_a_bullet_continues_under_its_text_with_its_styles():
    out = io.StringIO()
    Terminal(out, width=30, colour=True).print(
        "[yellow]-[/yellow] regime [bold]kd_a[/bold]: declared target A moved neither "
        "marginally nor given its neighbours")
    lines = out.getvalue().splitlines()
    assert lines[0].startswith("\x1b[33m-\x1b[0m regime \x1b[1mkd_a\x1b[0m")
    assert len(lines) > 2 and all(line.startswith("  ") for line in lines[1:])
    plain = " ".join(Styled.parse(line.replace("\x1b[33m", "").replace("\x1b[1m", "")
                                  .replace("\x1b[0m", "")).plain.strip() for line in lines)
    assert plain == ("- regime kd_a: declared target A moved neither marginally nor given "
                     "its neighbours")


def test_a_terminal_of_unknown_size_gets_80_columns(monkeypatch):
    # a terminal without a window size (as under `script`) reports 0 columns
    class Tty(io.StringIO):
        def isatty(self):
            return True

        def fileno(self):
            return 1

    monkeypatch.delenv("COLUMNS", raising=False)
    monkeypatch.setattr("os.get_terminal_size", lambda fd: os.terminal_size((0, 0)))
    assert Terminal(Tty()).width == 80
    monkeypatch.setattr("os.get_terminal_size", lambda fd: os.terminal_size((132, 40)))
    assert Terminal(Tty()).width == 132
