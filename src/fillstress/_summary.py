"""Short summaries of the main objects: a few labelled lines for ``repr`` and the same as
an HTML table for Jupyter (``_repr_html_``), instead of every array and table they hold."""
from __future__ import annotations

from html import escape


def crs_text(crs) -> str:
    """A CRS as a summary shows it: pyproj's name, or the text it was given as.

    >>> crs_text(None), crs_text("EPSG:32633")
    ('none', 'EPSG:32633')
    """
    if crs is None:
        return "none"
    return str(getattr(crs, "name", crs))


class Summarised:
    """Mixin: ``repr`` and ``_repr_html_`` from :meth:`_summary` (title, [(label, text)]).

    Dataclasses using it are declared with ``repr=False`` so their generated ``repr``
    (which prints every field in full) does not replace this one.

    Examples
    --------
    >>> class Pad(Summarised):
    ...     def _summary(self):
    ...         return "Pad <north>", [("area", "12 m²"), ("load", "340 kN")]
    >>> print(repr(Pad()))
    <Pad <north>>
      area  12 m²
      load  340 kN
    >>> Pad()._repr_html_()[:40]
    '<table><caption>Pad &lt;north&gt;</capti'
    """

    def _summary(self) -> tuple[str, list[tuple[str, str]]]:
        raise NotImplementedError

    def __repr__(self) -> str:
        title, rows = self._summary()
        width = max((len(label) for label, _ in rows), default=0)
        return "\n".join([f"<{title}>", *(f"  {label:<{width}}  {text}" for label, text in rows)])

    def _repr_html_(self) -> str:
        title, rows = self._summary()
        body = "".join(f"<tr><th style='text-align:left'>{escape(label)}</th>"
                       f"<td style='text-align:left'>{escape(text)}</td></tr>"
                       for label, text in rows)
        return f"<table><caption>{escape(title)}</caption>{body}</table>"
