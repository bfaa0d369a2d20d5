"""Short text and HTML displays of result objects, for the console and notebooks.

A result shows a handful of headline numbers (``repr``: a few lines; ``_repr_html_``: a
small table, which Jupyter shows in place of the repr); everything else stays on the object
and in its ``to_dict()``. Numbers are shown to 4 significant figures — for display only,
the objects keep full precision.

Summaries of several fields are dicts (the ``"summary"`` of a grains or particles JSON
document); :class:`Summary` is that dict with the same two displays.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence

Rows = Sequence[tuple[str, str]]


def num(v, unit: str = "", digits: int = 4) -> str:
    """A number for display (``-`` when missing)."""
    if v is None or isinstance(v, bool) or not isinstance(v, (int, float)):
        return "-" if v is None else str(v)
    if isinstance(v, float) and not math.isfinite(v):
        return "-"
    text = f"{v:.{digits}g}" if isinstance(v, float) else str(v)
    return f"{text} {unit}".rstrip()


def with_ci(v, ci, unit: str = "", factor: float = 1.0) -> str:
    """``value unit, 95 % CI [low, high]``."""
    scaled = None if v is None else v * factor
    text = num(scaled, unit)
    if ci and len(ci) == 2 and None not in ci:
        text += f" (95 % CI {num(ci[0] * factor)} – {num(ci[1] * factor)})"
    return text


def text_block(title: str, rows: Rows) -> str:
    """``<title>`` then one indented ``label: value`` line per row."""
    width = max((len(k) for k, _ in rows), default=0)
    return "\n".join([f"<{title}>", *(f"  {k:<{width}}  {v}" for k, v in rows)])


def html_table(title: str, rows: Rows) -> str:
    """A small two-column HTML table with ``title`` as its caption."""
    body = "".join(f"<tr><th style='text-align:left'>{html.escape(k)}</th>"
                   f"<td style='text-align:left'>{html.escape(v)}</td></tr>" for k, v in rows)
    return (f"<table><caption style='text-align:left'><b>{html.escape(title)}</b></caption>"
            f"{body}</table>")


class Displayed:
    """Mixin: ``repr`` and ``_repr_html_`` from ``_display()`` -> (title, rows).

    A dataclass using it is declared with ``repr=False`` (else its generated repr wins).
    """

    def _display(self) -> tuple[str, Rows]:  # pragma: no cover - every user defines it
        raise NotImplementedError

    def __repr__(self) -> str:
        return text_block(*self._display())

    def _repr_html_(self) -> str:
        return html_table(*self._display())


def _flags(flags) -> str:
    return ", ".join(flags) if flags else "none"


class Summary(Displayed, dict):
    """The summary of a specimen's fields (a plain dict, as written to the JSON document),
    shown short. ``kind`` is ``"grains"`` or ``"particles"``."""

    def __init__(self, data=(), *, kind: str):
        super().__init__(data)
        self.kind = kind

    def __reduce__(self):  # pickles (worker processes) as the plain dict it is
        return (dict, (dict(self),))

    def _display(self) -> tuple[str, Rows]:
        s = self
        n = s.get("n_fields", 0)
        basis = s.get("ci_basis") or s.get("basis") or "-"
        if self.kind == "grains":
            rows = [("fields", f"{n} (CI from {basis})"),
                    ("mean lineal intercept",
                     with_ci(s.get("mean_intercept_um"), s.get("mean_intercept_ci95_um"), "µm")),
                    ("relative accuracy", num(s.get("relative_accuracy_pct"), "%")),
                    ("ASTM E112 G", with_ci(s.get("astm_g"), s.get("astm_g_ci95"))),
                    ("grains per mm²", with_ci(s.get("grains_per_mm2"),
                                               s.get("grains_per_mm2_ci95"))),
                    ("grains counted", num(s.get("grain_count_total"))),
                    ("duplex", "yes" if s.get("duplex") else "no")]
            return "grain-size summary", rows
        rows = [("fields", f"{n} (CI from {basis})"),
                ("volume fraction", with_ci(s.get("volume_fraction"),
                                            s.get("volume_fraction_ci95"), "%", 100.0)),
                ("mean ECD", with_ci(s.get("mean_ecd_um"), s.get("mean_ecd_ci95_um"), "µm")),
                ("mean sphere diameter", with_ci(s.get("mean_sphere_diameter_um"),
                                                 s.get("mean_sphere_diameter_ci95_um"), "µm")),
                ("particles per µm²", with_ci(s.get("particles_per_um2"),
                                              s.get("particles_per_um2_ci95"))),
                ("particles counted", num(s.get("particles_counted"))),
                ("flags", _flags(s.get("flags")))]
        return "particle summary", rows
