"""A renderable that shows the first of several layouts that fits the console's width. Pure: computes nothing.

Wide tables offer a stacked or shorter layout for narrow terminals, so no number is ever cut off.
"""
from __future__ import annotations

from rich.console import Console, ConsoleOptions, RenderResult
from rich.table import Table


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
        widest = max((len(row[k]) for row in rows), default=1)
        table.add_column(heading, justify="right", min_width=max(widest, 1), overflow="fold")


def key_column(table: Table, heading: str, keys) -> None:
    """A left-aligned column of quantity keys, as wide as the longest key."""
    table.add_column(heading, min_width=max((len(k) for k in keys), default=len(heading)), no_wrap=True)
