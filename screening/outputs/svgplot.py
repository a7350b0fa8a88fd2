"""A small SVG plotter for the calculation sheets' figures: panels in data units, written as text.

The sheets' figures are a few dozen marks each: polygons, lines, an arrow, some text and, for
the draws of method.md §13, one dot per draw. matplotlib took about 0.33 s a sheet to lay out
their text and rasterise them as PNG, which made the calculation sheets most of the demo's time
(issue #18); written directly as SVG they take milliseconds and stay sharp when printed.

A :class:`Figure` holds :class:`Panel` boxes in pixels; a panel maps its data window onto its
box (y up) and clips what it draws to it. Every text is XML-escaped. Nothing here knows about
walls: :mod:`screening.outputs.sheets` draws with it.
"""

from __future__ import annotations

import base64
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from html import escape
from typing import Any

import numpy as np

FONT = "DejaVu Sans, Verdana, Arial, Helvetica, sans-serif"
CHAR_WIDTH = 0.58
"""Width of an average character as a fraction of the font size (DejaVu Sans is about 0.55 to
0.6): used only to space the legend's entries and to keep a label inside the figure."""


def _px(v: float) -> str:
    """A pixel coordinate to 0.1 px (the figures are about 1000 px wide)."""
    return f"{v:.1f}".rstrip("0").rstrip(".") if math.isfinite(v) else "0"


def _style(
    fill: str = "none",
    stroke: str = "none",
    width: float = 0.0,
    opacity: float = 1.0,
    dash: str | None = None,
) -> str:
    parts = [f'fill="{fill}"']
    if stroke != "none" and width > 0:
        parts += [f'stroke="{stroke}"', f'stroke-width="{_px(width)}"']
    if opacity < 1:
        parts.append(f'opacity="{opacity:g}"')
    if dash:
        parts.append(f'stroke-dasharray="{dash}"')
    return " ".join(parts)


def _tick(x0: float, y0: float, x1: float, y1: float) -> str:
    ends = f'x1="{_px(x0)}" y1="{_px(y0)}" x2="{_px(x1)}" y2="{_px(y1)}"'
    return f'<line {ends} stroke="#000000" stroke-width="0.8"/>'


DASHES = {"dashed": "6 4", "dotted": "1.5 3", "dashdot": "8 3 2 3"}


def nice_ticks(lo: float, hi: float, most: int = 5) -> np.ndarray:
    """Round ticks (steps of 1, 2, 2.5 or 5 × 10^k) within [lo, hi]: the finest step that gives
    at most ``most`` + 1 of them, and never fewer than two (one more than ``most`` + 1 where the
    range allows no step between)."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return np.array([lo]) if math.isfinite(lo) else np.array([])
    mag = 10.0 ** math.floor(math.log10((hi - lo) / max(most, 1)))
    steps = [m * mag * k for k in (0.1, 1.0, 10.0) for m in (1, 2, 2.5, 5)]

    def ticks(step: float) -> np.ndarray:
        first = math.ceil(lo / step - 1e-9) * step
        return np.round(np.arange(first, hi + step * 1e-9, step), 10) + 0.0  # + 0.0: no "-0"

    two = [t for t in map(ticks, steps) if t.size >= 2]
    return next((t for t in two if t.size <= most + 1), two[-1] if two else ticks(steps[0]))


def tick_text(ticks: np.ndarray) -> list[str]:
    """Tick labels with the decimals their step needs (0.5 → 1 decimal, 0.25 → 2)."""
    if ticks.size < 2:
        return [f"{t:g}".replace("-", "\u2212") for t in ticks]
    step = float(np.min(np.diff(ticks)))
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 0
    if decimals and any(abs(round(t, decimals) - t) > 1e-9 for t in ticks):
        decimals += 1
    return [f"{t:.{decimals}f}".replace("-", "\u2212") for t in ticks]  # a minus sign, not a hyphen


@dataclass
class _Entry:
    label: str
    kind: str  # "patch" or "line"
    style: str


@dataclass
class Panel:
    """A box of the figure [px] showing the data window ``xlim`` × ``ylim`` (y up)."""

    left: float
    top: float
    width: float
    height: float
    xlim: tuple[float, float]
    ylim: tuple[float, float]
    figure: Figure
    marks: list[str] = field(default_factory=list)

    def x(self, v: Any) -> Any:  # a number or a numpy array
        x0, x1 = self.xlim
        return self.left + (v - x0) / (x1 - x0) * self.width

    def y(self, v: Any) -> Any:
        y0, y1 = self.ylim
        return self.top + (y1 - v) / (y1 - y0) * self.height

    def _points(self, xs: Iterable[float], ys: Iterable[float]) -> str:
        return " ".join(f"{_px(self.x(a))},{_px(self.y(b))}" for a, b in zip(xs, ys, strict=True))

    def polygon(
        self,
        points: Sequence[tuple[float, float]],
        fill: str,
        stroke: str = "none",
        width: float = 0.0,
        opacity: float = 1.0,
        label: str | None = None,
    ) -> None:
        style = _style(fill, stroke, width, opacity)
        xs, ys = zip(*points, strict=True) if points else ((), ())
        self.marks.append(f'<polygon points="{self._points(xs, ys)}" {style}/>')
        self.figure.legend_entry(label, "patch", style)

    def line(
        self,
        xs: Sequence[float],
        ys: Sequence[float],
        color: str,
        width: float = 1.0,
        dash: str | None = None,
        label: str | None = None,
    ) -> None:
        style = _style("none", color, width, 1.0, DASHES.get(dash or "", dash))
        self.marks.append(f'<polyline points="{self._points(xs, ys)}" {style}/>')
        self.figure.legend_entry(label, "line", style)

    def fill_betweenx(
        self,
        ys: Sequence[float],
        x1: Sequence[float],
        x2: Sequence[float],
        color: str,
        opacity: float,
        label: str | None = None,
    ) -> None:
        """The area between two curves x1(y) and x2(y), as matplotlib's function of that name."""
        self._band(list(zip(x1, ys, strict=True)), list(zip(x2, ys, strict=True)), color, opacity, label)

    def fill_between(
        self,
        xs: Sequence[float],
        y1: Sequence[float],
        y2: Sequence[float],
        color: str,
        opacity: float,
        label: str | None = None,
    ) -> None:
        """The area between two curves y1(x) and y2(x)."""
        self._band(list(zip(xs, y1, strict=True)), list(zip(xs, y2, strict=True)), color, opacity, label)

    def _band(
        self,
        one: list[tuple[float, float]],
        other: list[tuple[float, float]],
        color: str,
        opacity: float,
        label: str | None,
    ) -> None:
        """The polygon along one curve and back along the other."""
        self.polygon([*one, *reversed(other)], color, opacity=opacity, label=label)

    def arrow(self, tail: tuple[float, float], head: tuple[float, float], color: str, width: float) -> None:
        """A straight arrow with a filled head 10 px long ending at ``head``."""
        (x0, y0), (x1, y1) = (self.x(tail[0]), self.y(tail[1])), (self.x(head[0]), self.y(head[1]))
        length = math.hypot(x1 - x0, y1 - y0)
        if length == 0:
            return
        ux, uy = (x1 - x0) / length, (y1 - y0) / length
        bx, by = x1 - 10 * ux, y1 - 10 * uy
        wing = [(bx + 3.5 * uy, by - 3.5 * ux), (bx - 3.5 * uy, by + 3.5 * ux)]
        self.marks.append(
            f'<line x1="{_px(x0)}" y1="{_px(y0)}" x2="{_px(bx)}" y2="{_px(by)}" '
            f"{_style('none', color, width)}/>"
        )
        head_pts = " ".join(f"{_px(a)},{_px(b)}" for a, b in [(x1, y1), *wing])
        self.marks.append(f'<polygon points="{head_pts}" fill="{color}"/>')

    def dots(self, xs: np.ndarray, ys: np.ndarray, color: str, size: float = 3.0) -> None:
        """One round dot of ``size`` px per point, written as a single path of zero-length strokes."""
        keep = np.isfinite(xs) & np.isfinite(ys)
        if not keep.any():
            return
        px, py = self.x(xs[keep]), self.y(ys[keep])
        d = "".join(f"M{a:.1f} {b:.1f}h0" for a, b in zip(px.tolist(), py.tolist(), strict=True))
        self.marks.append(
            f'<path d="{d}" stroke="{color}" stroke-width="{_px(size)}" stroke-linecap="round" fill="none"/>'
        )

    def text(
        self,
        x: float,
        y: float,
        words: str,
        size: float = 12.0,
        anchor: str = "start",
        color: str = "#000000",
        hang: bool = False,
    ) -> None:
        """``words`` at data point (x, y); ``hang``: the text's top at that point."""
        self.marks.append(
            self.figure.text_mark(
                self.x(x), self.y(y) + (0.8 * size if hang else 0.0), words, size, anchor, color
            )
        )

    def axes_text(self, fx: float, fy: float, words: str, size: float = 12.0) -> None:
        """``words`` centred at a fraction (fx, fy) of the panel's box (0, 0 = bottom left)."""
        x = self.left + fx * self.width
        y = self.top + (1 - fy) * self.height + 0.35 * size
        self.marks.append(self.figure.text_mark(x, y, words, size, "middle", "#000000"))

    def hline(
        self, y: float, color: str, width: float = 1.0, dash: str | None = None, label: str | None = None
    ) -> None:
        self.line(self.xlim, (y, y), color, width, dash, label)

    def vline(
        self, x: float, color: str, width: float = 1.0, dash: str | None = None, label: str | None = None
    ) -> None:
        self.line((x, x), self.ylim, color, width, dash, label)

    def frame(
        self,
        xlabel: str = "",
        ylabel: str = "",
        title: str = "",
        xticks: int = 5,
        yticks: int = 5,
        ytick_labels: bool = True,
        size: float = 12.0,
    ) -> None:
        """The box, round ticks with their labels, the axis labels and a title above."""
        fig, bottom = self.figure, self.top + self.height
        out = [
            f'<rect x="{_px(self.left)}" y="{_px(self.top)}" width="{_px(self.width)}" '
            f'height="{_px(self.height)}" fill="none" stroke="#000000" stroke-width="0.8"/>'
        ]
        xt = nice_ticks(*self.xlim, most=xticks)
        for t, words in zip(xt, tick_text(xt), strict=True):
            px = self.x(float(t))
            out.append(_tick(px, bottom, px, bottom + 4))
            out.append(fig.text_mark(px, bottom + 5 + size, words, size, "middle", "#000000"))
        yt = nice_ticks(*self.ylim, most=yticks)
        for t, words in zip(yt, tick_text(yt), strict=True):
            py = self.y(float(t))
            out.append(_tick(self.left - 4, py, self.left, py))
            if ytick_labels:
                out.append(fig.text_mark(self.left - 6, py + 0.35 * size, words, size, "end", "#000000"))
        if xlabel:
            out.append(
                fig.text_mark(
                    self.left + self.width / 2, bottom + 10 + 2.2 * size, xlabel, size, "middle", "#000000"
                )
            )
        if ylabel:
            cx, cy = self.left - 12 - 2.4 * size, self.top + self.height / 2
            out.append(
                f'<text transform="translate({_px(cx)} {_px(cy)}) rotate(-90)" text-anchor="middle" '
                f'font-size="{_px(size)}">{escape(ylabel)}</text>'
            )
        if title:
            out.append(
                fig.text_mark(self.left + self.width / 2, self.top - 6, title, size, "middle", "#000000")
            )
        fig.parts.extend(out)


@dataclass
class Figure:
    """An SVG picture ``width`` × ``height`` px made of panels, texts and one legend."""

    width: float
    height: float
    panels: list[Panel] = field(default_factory=list)
    parts: list[str] = field(default_factory=list)
    entries: list[_Entry] = field(default_factory=list)

    def panel(
        self,
        left: float,
        top: float,
        width: float,
        height: float,
        xlim: tuple[float, float],
        ylim: tuple[float, float],
    ) -> Panel:
        p = Panel(
            left, top, width, height, (float(xlim[0]), float(xlim[1])), (float(ylim[0]), float(ylim[1])), self
        )
        self.panels.append(p)
        return p

    def legend_entry(self, label: str | None, kind: str, style: str) -> None:
        if label and label not in (e.label for e in self.entries):
            self.entries.append(_Entry(label, kind, style))

    def text_mark(self, x: float, y: float, words: str, size: float, anchor: str, color: str) -> str:
        fill = "" if color == "#000000" else f' fill="{color}"'
        middle = "" if anchor == "start" else f' text-anchor="{anchor}"'
        return f'<text x="{_px(x)}" y="{_px(y)}" font-size="{_px(size)}"{middle}{fill}>{escape(words)}</text>'

    def legend(self, centre_x: float, y: float, size: float = 12.0, max_width: float | None = None) -> float:
        """The labelled marks in the order first drawn, in rows centred on ``centre_x`` no wider
        than ``max_width`` (the figure's width); returns the height the rows take."""
        room = max_width or self.width
        widths = [26 + CHAR_WIDTH * size * len(e.label) + 14 for e in self.entries]
        rows: list[list[int]] = []
        for k, w in enumerate(widths):
            if rows and sum(widths[i] for i in rows[-1]) + w <= room:
                rows[-1].append(k)
            else:
                rows.append([k])
        for r, row in enumerate(rows):
            x = centre_x - sum(widths[i] for i in row) / 2
            top = y + r * (size + 6)
            for i in row:
                self._entry(self.entries[i], x, top, size)
                x += widths[i]
        return len(rows) * (size + 6)

    def legend_column(self, panel: Panel, right: bool = True, size: float = 12.0) -> None:
        """The labelled marks one under another on a white box in an upper corner of ``panel``."""
        if not self.entries:
            return
        w = 30 + CHAR_WIDTH * size * max(len(e.label) for e in self.entries)
        h = len(self.entries) * (size + 5) + 6
        x = panel.left + panel.width - 6 - w if right else panel.left + 6
        top = panel.top + 6
        self.parts.append(
            f'<rect x="{_px(x)}" y="{_px(top)}" width="{_px(w)}" height="{_px(h)}" fill="#ffffff" '
            'fill-opacity="0.85" stroke="#cccccc" stroke-width="0.8"/>'
        )
        for k, e in enumerate(self.entries):
            self._entry(e, x + 5, top + 4 + k * (size + 5), size)

    def _entry(self, e: _Entry, x: float, top: float, size: float) -> None:
        """One legend entry, its swatch 18 px wide at ``x`` and its label after it."""
        y = top + size / 2
        if e.kind == "patch":
            self.parts.append(f'<rect x="{_px(x)}" y="{_px(y - 5)}" width="18" height="10" {e.style}/>')
        else:
            self.parts.append(
                f'<line x1="{_px(x)}" y1="{_px(y)}" x2="{_px(x + 18)}" y2="{_px(y)}" {e.style}/>'
            )
        self.parts.append(self.text_mark(x + 24, top + 0.85 * size, e.label, size, "start", "#000000"))

    def svg(self, title: str = "") -> str:
        """The picture as a standalone SVG document (each panel's marks clipped to its box)."""
        out = [
            f'<svg xmlns="http://www.w3.org/2000/svg" width="{_px(self.width)}" height="{_px(self.height)}" '
            f'viewBox="0 0 {_px(self.width)} {_px(self.height)}" font-family="{FONT}">'
        ]
        if title:
            out.append(f"<title>{escape(title)}</title>")
        out.append(f'<rect width="{_px(self.width)}" height="{_px(self.height)}" fill="#ffffff"/>')
        for k, p in enumerate(self.panels):
            out.append(
                f'<clipPath id="p{k}"><rect x="{_px(p.left)}" y="{_px(p.top)}" '
                f'width="{_px(p.width)}" height="{_px(p.height)}"/></clipPath>'
            )
            out.append(f'<g clip-path="url(#p{k})">{"".join(p.marks)}</g>')
        out.extend(self.parts)
        out.append("</svg>")
        return "".join(out)

    def data_uri(self, title: str = "") -> str:
        """The SVG as a data: address for an <img> (base64: no character of it needs escaping)."""
        return "data:image/svg+xml;base64," + base64.b64encode(self.svg(title).encode("utf-8")).decode(
            "ascii"
        )
