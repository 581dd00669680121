"""A renderable that shows the first of several layouts that fits the console's width. Pure: computes nothing.

Wide tables offer a stacked or shorter layout for narrow terminals, so no number is ever cut off.
"""
from __future__ import annotations

from rich import box
from rich.console import Console, ConsoleOptions, Group, RenderResult
from rich.table import Table
from rich.text import Text


class Fitting:
    """Render the first table whose narrowest layout fits the available width (the last one otherwise)."""

    def __init__(self, *choices: Table):
        self.choices = choices

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        for table in self.choices[:-1]:
            if needed_width(table) <= options.max_width:
                yield table
                return
        yield self.choices[-1]


def needed_width(table: Table) -> int:
    """The narrowest width at which no column falls below its minimum (cells, padding and rules)."""
    left, right = table.padding[3], table.padding[1]
    cells = sum((c.min_width or 1) + left + right for c in table.columns)
    rules = len(table.columns) - 1 + (2 if table.show_edge else 0)
    return cells + rules


def number_columns(table: Table, headings: tuple[str, ...], rows: list[list[str]]) -> None:
    """Right-aligned columns never narrower than their widest cell (a header may wrap, a number never)."""
    for k, heading in enumerate(headings):
        widest = max([len(row[k]) for row in rows] + [len(word) for word in heading.split()] + [1])
        table.add_column(heading, justify="right", min_width=widest, overflow="fold")


def key_column(table: Table, heading: str, keys) -> None:
    """A left-aligned column of quantity keys, as wide as the longest key."""
    table.add_column(heading, min_width=max((len(k) for k in keys), default=len(heading)), no_wrap=True)


def stacked(title: str, caption: str, headings: tuple[str, ...],
            blocks: list[tuple[str, list[list[str]]]]) -> Group:
    """A narrow layout: each quantity's key on its own line, its rows below in columns of one fixed width.

    Every cell keeps its full text; only the header of the first block is shown.
    """
    widths = [max([len(part) for part in h.split("\n")] + [len(row[k]) for _, rows in blocks for row in rows])
              for k, h in enumerate(headings)]
    parts: list = [Text(title, style="italic")]
    for i, (key, rows) in enumerate(blocks):
        table = Table(box=box.SIMPLE_HEAD, show_header=i == 0, show_edge=False, pad_edge=False,
                      header_style="bold", padding=(0, 1))
        for k, (heading, width) in enumerate(zip(headings, widths)):
            table.add_column(heading, justify="left" if k == 0 else "right", width=width, no_wrap=True)
        for row in rows:
            table.add_row(*row)
        parts += [Text(key, style="bold"), table]
    parts.append(Text(caption))
    return Group(*parts)
