"""What the command prints: errors, progress bars and summary tables (rich)."""
from __future__ import annotations

import sys
from contextlib import contextmanager

from rich.console import Console as _RichConsole
from rich.markup import escape
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn
from rich.table import Table

from .progress import silent


class Console:
    def __init__(self, quiet: bool = False):
        self.quiet = quiet
        # Piped output (logs, CI) gets a wide table instead of rich's 80-column default.
        wide = None if sys.stdout.isatty() else 140
        self.out = _RichConsole(highlight=False, width=wide)
        self.err = _RichConsole(stderr=True, highlight=False)

    def error(self, message: str) -> None:
        self.err.print(f"[bold red]fillstress: error:[/] {escape(message)}", soft_wrap=True)

    def wrote(self, path) -> None:
        if not self.quiet:
            self.out.print(f"wrote {escape(str(path))}")

    @contextmanager
    def progress(self, label: str, total: int):
        if self.quiet:
            with silent(label, total) as bar:
                yield bar
            return
        with Progress(TextColumn("{task.description:<34}"), BarColumn(),
                      TextColumn("{task.completed}/{task.total}"), TimeElapsedColumn(),
                      TimeRemainingColumn(), console=self.err, transient=False) as bar:
            task = bar.add_task(label, total=total)

            class _Advance:
                def advance(self, n: int = 1):
                    bar.advance(task, n)
            yield _Advance()

    # --- tables -----------------------------------------------------------------
    def table(self, title: str, columns: list[str], rows: list[list]) -> None:
        if self.quiet:
            return
        t = Table(title=title, title_justify="left", show_lines=False)
        for k, c in enumerate(columns):
            numeric = rows and all(isinstance(r[k], (int, float)) and not isinstance(r[k], bool)
                                   for r in rows)
            t.add_column(c, justify="right" if numeric else "left")
        for r in rows:
            t.add_row(*[escape(_fmt(v)) for v in r])
        self.out.print(t)

    def lines(self, lines: list[str]) -> None:
        if not self.quiet:
            for line in lines:
                self.out.print(escape(line))

    def summary(self, summary) -> None:
        for block in summary.tables():
            self.table(*block)
        self.lines(summary.closing_lines())

    def check(self, report) -> None:
        for block in report.tables():
            self.table(*block)
        self.lines(report.closing_lines())

    def points(self, result) -> None:
        self.table(*result)

    def examples(self, items) -> None:
        self.table("Bundled sample sites", ["name", "what it shows"], items)
        self.lines(["run one with: fillstress example NAME"])


def _fmt(v) -> str:
    if isinstance(v, float):
        if v != v:
            return "–"
        if abs(v) >= 1000:
            return f"{v:,.0f}"
        return f"{v:.3g}" if abs(v) < 1e-2 and v != 0 else f"{v:,.2f}"
    return str(v)
