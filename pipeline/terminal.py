"""Text for a terminal: styled lines and aligned tables, fitted to the window's width.

Every command prints its result through a `Terminal`. A line of text may carry styles in
brackets, ``"[bold]Learned graph[/bold]: 12 edges"``; the known styles are in `STYLES`
(several at once: ``[bold yellow]``), ``[/]`` closes the latest, and a bracket that names
no known style is plain text. Text from outside (names of variables, regimes, files) goes
through `escape` first so that it is always shown as it is.

Colours and bold are written as ANSI escape codes only to a terminal, and never when the
``NO_COLOR`` environment variable is set (``FORCE_COLOR`` forces them); a file, a pipe or
`plain_text` gets the bare characters. The width is the window's (``COLUMNS`` overrides),
80 columns when the output is not a terminal. Long lines wrap between words; a table wider
than the window narrows its widest wrappable columns and wraps their cells.

The module imports nothing outside the standard library: the summary of a ``learn``
run prints in about 3.5 ms, which matters to a rerun that takes a sixth of a second in
all (a rendering library took some 40 ms with its import).

>>> t = Table("Edges")
>>> t.add_column("edge")
>>> t.add_column("p", justify="right")
>>> t.add_row("A -> B", "0.001")
>>> t.add_row("[bold]B[/bold] -> C", "0.04")
>>> print(plain_text(lambda out: out.print(t), 40), end="")
<BLANKLINE>
Edges
edge        p
------  -----
A -> B  0.001
B -> C   0.04
"""

from __future__ import annotations

import bisect
import io
import os
import re
import sys
from collections.abc import Callable, Sequence
from typing import Any, TextIO

__all__ = ["Terminal", "Table", "escape", "plain_text", "STYLES"]

#: The styles a bracket may name, with their ANSI select-graphic-rendition codes.
STYLES = {"bold": "1", "dim": "2", "italic": "3", "underline": "4", "red": "31",
          "green": "32", "yellow": "33", "blue": "34", "magenta": "35", "cyan": "36"}

_TOKEN = re.compile(r"\\([\\\[])|\[(/?)([a-z ]*)\]")
#: Width of a table's column gap, and the narrowest a wrapped column becomes.
_GAP, _NARROWEST = 2, 6


def escape(text: str) -> str:
    r"""`text` as a literal in styled text: its brackets and backslashes are not markup.

    >>> escape("[bold] a\\b")
    '\\[bold] a\\\\b'
    """
    return str(text).replace("\\", "\\\\").replace("[", "\\[")


class Styled:
    """A run of text with a style on each piece: ``[(text, ansi_codes), ...]``."""

    __slots__ = ("pieces",)

    def __init__(self, pieces: list[tuple[str, str]]):
        self.pieces = pieces

    @classmethod
    def parse(cls, markup: str) -> Styled:
        """Styled text from markup (see the module docstring)."""
        pieces: list[tuple[str, str]] = []
        stack: list[str] = []
        buffer: list[str] = []
        pos = 0

        def flush() -> None:
            if buffer:
                pieces.append(("".join(buffer), ";".join(stack)))
                buffer.clear()

        for m in _TOKEN.finditer(markup):
            buffer.append(markup[pos:m.start()])
            pos = m.end()
            if m.group(1) is not None:  # an escaped bracket or backslash
                buffer.append(m.group(1))
                continue
            closing, words = m.group(2), m.group(3).split()
            if closing and not words:
                flush()
                if stack:
                    stack.pop()
            elif words and all(w in STYLES for w in words):
                flush()
                if closing:
                    if stack:
                        stack.pop()
                else:
                    stack.append(";".join(STYLES[w] for w in words))
            else:  # not a style: plain text
                buffer.append(m.group(0))
        buffer.append(markup[pos:])
        flush()
        return cls([(t, s) for t, s in pieces if t])

    @property
    def plain(self) -> str:
        return "".join(t for t, _ in self.pieces)

    def __len__(self) -> int:
        return sum(len(t) for t, _ in self.pieces)

    def slice(self, start: int, stop: int) -> Styled:
        """The characters ``start:stop`` of the plain text, with their styles."""
        out, at = [], 0
        for text, style in self.pieces:
            a, b = max(start - at, 0), min(stop - at, len(text))
            if a < b:
                out.append((text[a:b], style))
            at += len(text)
        return Styled(out)

    def render(self, colour: bool) -> str:
        if not colour:
            return self.plain
        return "".join(f"\x1b[{s}m{t}\x1b[0m" if s else t for t, s in self.pieces)

    def wrap(self, width: int, cut: bool = True) -> list[Styled]:
        """Lines of at most `width` characters, broken between words; a word longer than
        a line is cut, or with `cut` False left whole on a line of its own."""
        return [self.slice(a, b) for a, b in _breaks(self.plain, width, cut)]


def _breaks(text: str, width: int, cut: bool = True) -> list[tuple[int, int]]:
    """Spans of `text` for lines of at most `width` characters: greedy, between words
    (the spaces at a break dropped); a word longer than a line is cut if `cut`, else it
    overflows (a path stays whole for copying)."""
    width = max(width, 1)
    spans: list[tuple[int, int]] = []
    start, n = 0, len(text)
    while n - start > width:
        space = text.rfind(" ", start, start + width + 1)
        if space <= start and cut:  # one long word, cut
            spans.append((start, start + width))
            start += width
        elif space <= start:  # one long word, whole
            space = text.find(" ", start + width)
            if space < 0:
                break
            spans.append((start, space))
            start = space + 1
        else:
            end = space
            while end > start and text[end - 1] == " ":
                end -= 1
            spans.append((start, end))
            start = space + 1
        while start < n and text[start] == " ":
            start += 1
    spans.append((start, n))
    return spans


class Table:
    """Rows of cells under a title and a header, columns aligned.

    Cells are styled text (see the module docstring); `add_column` says how a column is
    aligned and whether its cells may wrap when the table is wider than the window.
    """

    def __init__(self, title: str | None = None):
        self.title = title
        self.columns: list[tuple[Styled, str, bool, int]] = []
        self.rows: list[list[Styled] | None] = []  # None: a rule between row groups

    def add_column(self, header: str, *, justify: str = "left", no_wrap: bool = False,
                   min_width: int = 0) -> None:
        """A column: `justify` is ``"left"`` or ``"right"``; `no_wrap` keeps its cells on
        one line; `min_width` is its narrowest width."""
        if justify not in ("left", "right"):
            raise ValueError(f"justify={justify!r}: expected 'left' or 'right'")
        self.columns.append((Styled.parse(header), justify, no_wrap, int(min_width)))

    def add_row(self, *cells: str) -> None:
        """A row of as many cells as there are columns (missing ones are blank)."""
        if len(cells) > len(self.columns):
            raise ValueError(f"a row of {len(cells)} cells for {len(self.columns)} columns")
        parsed = [Styled.parse(str(c)) for c in cells]
        self.rows.append(parsed + [Styled([])] * (len(self.columns) - len(parsed)))

    def add_section(self) -> None:
        """A rule under the rows so far: the next rows form a group of their own."""
        self.rows.append(None)

    def widths(self, room: int) -> list[int]:
        """Column widths fitting `room` characters where wrapping allows.

        Columns narrow in three stages, each as far as needed: first only headers wrap
        (to their longest word); then cells wrap between words (to the longest word of
        the column); last, words are cut (to `min_width`, at least six characters). In
        each stage the column where the fewest cells would wrap narrows first (then the one
        with the most room to give).
        """
        rows = [r for r in self.rows if r is not None]
        natural, stages, lengths = [], [], []
        for j, (header, _, no_wrap, least) in enumerate(self.columns):
            cells = [r[j].plain for r in rows]
            lengths.append(sorted(map(len, cells)))
            longest_cell = lengths[-1][-1] if cells else 0
            header_word = max(map(len, header.plain.split()), default=0)
            cell_word = max((len(w) for c in cells for w in c.split()), default=0)
            wide = max(len(header), longest_cell, least)
            natural.append(wide)
            stages.append([wide] * 3 if no_wrap else
                          [max(least, longest_cell, header_word),
                           max(least, cell_word, header_word),
                           min(wide, max(least, _NARROWEST))])

        def wrapped_if_narrowed(k: int) -> int:  # cells that would no longer fit
            return len(lengths[k]) - bisect.bisect_right(lengths[k], widths[k] - 1)

        widths = list(natural)
        excess = sum(widths) + _GAP * (len(widths) - 1) - room
        for stage in range(3):
            floor = [min(widths[j], stages[j][stage]) for j in range(len(widths))]
            while excess > 0:  # narrow the column where the fewest cells wrap, one at a time
                free = [k for k in range(len(widths)) if widths[k] > floor[k]]
                if not free:
                    break
                j = min(free, key=lambda k: (wrapped_if_narrowed(k), floor[k] - widths[k]))
                widths[j] -= 1
                excess -= 1
        return widths

    def lines(self, room: int, colour: bool) -> list[str]:
        """The table as lines of text for a window of `room` columns."""
        if not self.columns:
            return [] if self.title is None else [Styled.parse(self.title).render(colour)]
        widths = self.widths(room)
        out: list[str] = []
        if self.title:
            out.append("")
            out += [s.render(colour) for s in Styled.parse(f"[bold]{self.title}[/bold]")
                    .wrap(max(room, 1))]
        header = [Styled([(h.plain, STYLES["bold"])]) for h, _, _, _ in self.columns]
        out += self._row_lines(header, widths, colour)
        rule = (" " * _GAP).join("-" * w for w in widths)
        out.append(rule)
        for row in self.rows:
            out += [rule] if row is None else self._row_lines(row, widths, colour)
        return out

    def _row_lines(self, cells: Sequence[Styled], widths: list[int], colour: bool
                   ) -> list[str]:
        wrapped = [c.wrap(w) if len(c) > w else [c] for c, w in zip(cells, widths, strict=True)]
        height = max(len(w) for w in wrapped)
        lines = []
        for i in range(height):
            parts = []
            for j, (w, (_, justify, _, _)) in enumerate(zip(widths, self.columns, strict=True)):
                piece = wrapped[j][i] if i < len(wrapped[j]) else Styled([])
                pad = " " * (w - len(piece))
                text = piece.render(colour)
                parts.append(pad + text if justify == "right" else text + pad)
            lines.append((" " * _GAP).join(parts).rstrip() if not colour
                         else (" " * _GAP).join(parts))
        return lines


class Terminal:
    """Where a command's text goes: a stream, its width, and whether it shows colours.

    Parameters
    ----------
    file : text stream, optional
        Default: standard output (standard error with `stderr`).
    width : int, optional
        Columns to fit; default: the window's, or ``COLUMNS``, or 80 off a terminal.
    colour : bool, optional
        Write ANSI colours; default: only to a terminal, never with ``NO_COLOR`` set.
    """

    def __init__(self, file: TextIO | None = None, *, width: int | None = None,
                 colour: bool | None = None, stderr: bool = False):
        self.file = file if file is not None else (sys.stderr if stderr else sys.stdout)
        tty = _isatty(self.file)
        if colour is None:
            colour = (bool(os.environ.get("FORCE_COLOR"))
                      or (tty and "NO_COLOR" not in os.environ
                          and os.environ.get("TERM") != "dumb"))
        self.colour = bool(colour)
        self._width = width if width is None else max(int(width), 10)
        self._tty = tty
        self._gone = False

    @property
    def width(self) -> int:
        """The number of columns text is fitted to."""
        if self._width is not None:
            return self._width
        columns = os.environ.get("COLUMNS", "")
        if columns.isdigit() and int(columns) > 0:
            return int(columns)
        if self._tty:
            try:
                columns = os.get_terminal_size(self.file.fileno()).columns
            except (OSError, ValueError, AttributeError):
                columns = 0
            if columns > 0:  # a terminal of unknown size says 0 (as under `script`)
                return max(columns, 20)
        return 80

    def print(self, *items: str | Table, wrap: bool = True) -> None:
        """Write each item on its own lines: styled text (lines wrapped between words to
        the width unless `wrap` is False) or a `Table`. No item: an empty line."""
        width = self.width
        out: list[str] = []
        for item in items or ("",):
            if isinstance(item, Table):
                out += item.lines(width, self.colour)
                continue
            for line in str(item).split("\n"):
                styled = Styled.parse(line)
                if not wrap or len(styled) <= width:
                    out.append(styled.render(self.colour))
                    continue
                # a bullet ("- ...") continues under its text, not under the dash
                hang = 2 if styled.plain.startswith("- ") else 0
                first, *rest = styled.wrap(width, cut=False)
                if hang and rest:
                    tail = styled.slice(len(styled.plain) - len(styled.plain[len(first):]
                                                                .lstrip()), len(styled))
                    rest = tail.wrap(width - hang, cut=False)
                out.append(first.render(self.colour))
                out += [" " * hang + p.render(self.colour) for p in rest]
        self.write("\n".join(out) + "\n")

    def section(self, title: str) -> None:
        """A section heading: an empty line, then `title` (styled text) underlined."""
        styled = Styled.parse(title)
        self.write("\n" + styled.render(self.colour) + "\n"
                   + "=" * min(len(styled), self.width) + "\n")

    def write(self, text: str) -> None:
        """Write `text` as it is. Once the reader of a pipe has gone (``| head``), the
        rest of the output is dropped and the command goes on: its files are still
        written, and it ends as it would have."""
        if self._gone:
            return
        try:
            self.file.write(text)
            self.file.flush()
        except BrokenPipeError:
            self._gone = True
            _drop_standard_output(self.file)


def _drop_standard_output(stream: Any) -> None:
    """When `stream` is standard output, point its descriptor at the null device, so that
    nothing written later (nor Python's flush at exit) meets the closed pipe again."""
    try:
        if stream.fileno() == sys.__stdout__.fileno():
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, stream.fileno())
            os.close(null)
    except (AttributeError, ValueError, OSError):
        pass


def _isatty(stream: Any) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def plain_text(print_tables: Callable[..., None], width: int, **options: Any) -> str:
    """What ``print_tables(terminal, **options)`` shows, as plain text of `width`
    columns (the `summary` of every result type)."""
    buffer = io.StringIO()
    print_tables(Terminal(buffer, width=width, colour=False), **options)
    return buffer.getvalue()
