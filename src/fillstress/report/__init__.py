"""The engineering report of one results folder: one self-contained, printable HTML file."""
from __future__ import annotations

from .html import write_report

__all__ = ["write_report"]
