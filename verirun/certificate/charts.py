"""Pictures for the certificate: inline SVG drawings of one range of a run record.

Two pure functions of a range (a :class:`~verirun.record.documents.RangeEntry` of the record's
``ranges``) and its rows (that range's :class:`~verirun.record.documents.PointResult` rows, in
order):

- :func:`error_chart`: every measured error as a percent of its tolerance, against the shaded
  tolerance band (-100 % to +100 %), with uncertainty bars and acceptance limits when the rows
  carry them;
- :func:`arc_chart`: the meter's scale arc, with the expected pointer position, the allowed
  sector and the reading of every point whose tolerance is stated along the arc.

Both are plain string building: the same input gives the same bytes (coordinates are rounded to
0.01 and formatted by one function, nothing is random or read from a clock), every piece of text
from the record is escaped, and each element carries a class so the certificate's CSS can style
it. The colours written as presentation attributes are only defaults; any CSS rule overrides them.
The drawings are 720 user units wide, four to the millimetre, so 180 mm on the page.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

from verirun.metrology.scales import make_law
from verirun.record.documents import PointResult, RangeEntry
from verirun.units import format_quantity, prefix_for

WIDTH = 720.0
UNITS_PER_MM = 4.0
FONT = 11.0
CHAR_WIDTH = 6.2  # mean advance of one character at FONT, for laying out labels

INK, MUTED, GREY = "#1b1f24", "#5b6570", "#8c959f"
PASS, FAIL, ACCEPT = "#1a7f37", "#b42318", "#9a6700"
COND_PASS, COND_FAIL = "#7a5c00", "#c4500a"

#: The colour of each statement's marker; conditional statements are drawn hollow as well.
COLOURS = {"pass": PASS, "conditional-pass": COND_PASS, "conditional-fail": COND_FAIL, "fail": FAIL}
BAND_FILL, GRID = "#e6f4ea", "#d8dee4"


def _num(value: float) -> str:
    """A coordinate as text: rounded to 0.01, no trailing zeros, never ``-0``."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


def _esc(text: object) -> str:
    """Text from the record, safe in element content and in double-quoted attributes."""
    return (
        str(text)
        .replace("&", "&amp;")
        .replace("<", "&lt;")
        .replace(">", "&gt;")
        .replace('"', "&quot;")
    )


def _svg(kind: str, height: float, label: str, body: list[str]) -> str:
    """A standalone ``<svg>`` element of class ``chart kind`` holding ``body``."""
    head = (
        f'<svg xmlns="http://www.w3.org/2000/svg" class="chart {kind}"'
        f' viewBox="0 0 {_num(WIDTH)} {_num(height)}"'
        f' width="{_num(WIDTH / UNITS_PER_MM)}mm" height="{_num(height / UNITS_PER_MM)}mm"'
        f' role="img" aria-label="{_esc(label)}" font-family="sans-serif"'
        f' font-size="{_num(FONT)}">'
        f"<title>{_esc(label)}</title>"
    )
    return head + "".join(body) + "</svg>"


def _state(row: PointResult) -> str:
    """The row's own statement: the chart never works one out for itself."""
    verdict = row.verdict
    return verdict if verdict in COLOURS else "fail"


def _paint(state: str) -> str:
    """Fill and stroke of a marker: solid for pass and fail, hollow for a conditional statement."""
    colour = COLOURS[state]
    if state.startswith("conditional"):
        return f'fill="#ffffff" stroke="{colour}" stroke-width="2"'
    return f'fill="{colour}"'


# ---------------------------------------------------------------------------------------------
# Error chart


@dataclass(frozen=True)
class _Frame:
    """Where the error chart's plot area lies and how percent of tolerance maps onto it."""

    left: float
    top: float
    width: float
    height: float
    limit: float
    count: int
    rotate: bool

    def x(self, index: int) -> float:
        """Centre of the slot of the point at ``index``."""
        return self.left + (index + 0.5) * self.slot

    def y(self, pct: float) -> float:
        """Height of ``pct`` percent of tolerance, clipped to the plot area."""
        pct = max(-self.limit, min(self.limit, pct))
        return self.top + (self.limit - pct) / (2.0 * self.limit) * self.height

    @property
    def slot(self) -> float:
        return self.width / self.count

    @property
    def bottom(self) -> float:
        return self.top + self.height


def _percent(row: PointResult) -> float:
    """The row's error as percent of tolerance; a zero tolerance makes any error infinite."""
    pct = row.percent_of_tolerance
    if pct is not None:
        return float(pct)
    error = row.error or 0.0
    return 0.0 if error == 0 else math.copysign(math.inf, error)


def _limit(rows: list[PointResult]) -> float:
    """Half-height of the plot in percent of tolerance: room for the data, within reason."""
    need = 100.0
    for row in rows:
        for value in (row.accept_low_pct, row.accept_high_pct):
            if value is not None:
                need = max(need, abs(value))
        if row.reading is not None:
            pct = _percent(row)
            if math.isfinite(pct):
                need = max(need, abs(pct) + (row.U_pct or 0.0))
    # Past three times the tolerance the band would shrink to a stripe; clip and mark instead.
    return next((lim for lim in (150.0, 200.0, 300.0) if need <= 0.95 * lim), 300.0)


_LABEL_CHARS = 24


def _short(text: str) -> str:
    """An axis label no longer than :data:`_LABEL_CHARS` (the full text is in the tooltip)."""
    return text if len(text) <= _LABEL_CHARS else text[: _LABEL_CHARS - 1] + "…"


def _frame(rows: list[PointResult]) -> tuple[_Frame, float]:
    """The plot frame for ``rows`` and the height of the whole chart."""
    left, right, top = 64.0, 12.0, 14.0
    width = WIDTH - left - right
    longest = max(len(_short(str(r.stimulus))) for r in rows) * CHAR_WIDTH
    rotate = longest > width / len(rows) - 6.0
    bottom = min(longest * 0.58 + 24.0, 120.0) if rotate else 30.0  # 0.58 = sin 35°
    frame = _Frame(
        left=left,
        top=top,
        width=width,
        height=190.0,
        limit=_limit(rows),
        count=len(rows),
        rotate=rotate,
    )
    return frame, top + frame.height + bottom


def _axes(frame: _Frame) -> list[str]:
    """The plot frame, grid, tick labels, tolerance band and zero line."""
    x0, x1 = _num(frame.left), _num(frame.left + frame.width)
    step = 50.0 if frame.limit <= 200.0 else 100.0
    parts = [
        f'<rect class="band" x="{x0}" y="{_num(frame.y(100.0))}" width="{_num(frame.width)}"'
        f' height="{_num(frame.y(-100.0) - frame.y(100.0))}" fill="{BAND_FILL}"'
        f' stroke="{PASS}" stroke-width="0.8"/>'
    ]
    ticks = int(frame.limit // step)
    for i in range(-ticks, ticks + 1):
        pct = i * step
        y = _num(frame.y(pct))
        kind = "zero" if i == 0 else "grid"
        colour = MUTED if i == 0 else GRID
        parts.append(
            f'<line class="{kind}" x1="{x0}" y1="{y}" x2="{x1}" y2="{y}"'
            f' stroke="{colour}" stroke-width="0.8"/>'
        )
        parts.append(
            f'<text class="tick-label" x="{_num(frame.left - 6)}" y="{_num(frame.y(pct) + 4)}"'
            f' text-anchor="end" fill="{MUTED}">{pct:+.0f}</text>'.replace(">+0<", ">0<")
        )
    parts.append(
        f'<rect class="frame" x="{x0}" y="{_num(frame.top)}" width="{_num(frame.width)}"'
        f' height="{_num(frame.height)}" fill="none" stroke="{MUTED}" stroke-width="0.8"/>'
    )
    mid = _num(frame.top + frame.height / 2)
    parts.append(
        f'<text class="axis-title" x="14" y="{mid}" text-anchor="middle"'
        f' transform="rotate(-90 14 {mid})" fill="{MUTED}">% of tolerance</text>'
    )
    return parts


def _stimulus_label(frame: _Frame, index: int, stimulus: str) -> str:
    """The x-axis label of one point, turned aslant when the labels would collide."""
    x, y = frame.x(index), frame.bottom + 16.0
    text = _esc(_short(stimulus))
    if frame.rotate:
        return (
            f'<text class="stimulus" x="{_num(x)}" y="{_num(y)}" text-anchor="end"'
            f' transform="rotate(-35 {_num(x)} {_num(y)})" fill="{INK}">{text}</text>'
        )
    return (
        f'<text class="stimulus" x="{_num(x)}" y="{_num(y)}" text-anchor="middle"'
        f' fill="{INK}">{text}</text>'
    )


def _acceptance(frame: _Frame, index: int, row: PointResult) -> list[str]:
    """Dashed acceptance limits across the point's slot, where the row has them."""
    half = 0.4 * frame.slot
    x0, x1 = _num(frame.x(index) - half), _num(frame.x(index) + half)
    parts = []
    for value, side in ((row.accept_low_pct, "low"), (row.accept_high_pct, "high")):
        if value is not None:
            y = _num(frame.y(float(value)))
            parts.append(
                f'<line class="acceptance {side}" x1="{x0}" y1="{y}" x2="{x1}" y2="{y}"'
                f' stroke="{ACCEPT}" stroke-width="1.2" stroke-dasharray="5 3"/>'
            )
    return parts


def _uncertainty(frame: _Frame, x: float, pct: float, u_pct: float, colour: str) -> list[str]:
    """A vertical bar from ``pct - U`` to ``pct + U`` with a cap at each end."""
    x_text = _num(x)
    y_low, y_high = frame.y(pct - u_pct), frame.y(pct + u_pct)
    parts = [
        f'<line class="uncertainty" x1="{x_text}" y1="{_num(y_low)}" x2="{x_text}"'
        f' y2="{_num(y_high)}" stroke="{colour}" stroke-width="1.2"/>'
    ]
    for y in (y_low, y_high):
        parts.append(
            f'<line class="uncertainty-cap" x1="{_num(x - 4)}" y1="{_num(y)}"'
            f' x2="{_num(x + 4)}" y2="{_num(y)}" stroke="{colour}" stroke-width="1.2"/>'
        )
    return parts


def _clipped_marker(frame: _Frame, x: float, pct: float, state: str, tip: str) -> list[str]:
    """A triangle at the plot's edge pointing the way the value went, and the value beside it."""
    up = pct > 0
    edge = frame.y(frame.limit if up else -frame.limit)
    base = edge + (10.0 if up else -10.0)
    colour = COLOURS[state]
    points = f"{_num(x)},{_num(edge)} {_num(x - 6)},{_num(base)} {_num(x + 6)},{_num(base)}"
    value = ("+∞" if up else "-∞") if math.isinf(pct) else f"{pct:+.0f}"
    return [
        f'<polygon class="point {state} clipped" points="{points}" {_paint(state)}>'
        f"<title>{tip}</title></polygon>",
        f'<text class="clipped-value" x="{_num(x + 9)}" y="{_num((edge + base) / 2 + 4)}"'
        f' fill="{colour}">{value} %</text>',
    ]


def _measured(frame: _Frame, index: int, row: PointResult) -> list[str]:
    """Marker, and uncertainty bar if any, of one measured point."""
    pct = _percent(row)
    state = _state(row)
    colour = COLOURS[state]
    x = frame.x(index)
    shown = "∞" if math.isinf(pct) else f"{pct:+.1f}"
    tip = _esc(f"{row.stimulus}: {shown} % of tolerance, {row.verdict}")
    parts = []
    if row.U_pct is not None and abs(pct) <= frame.limit:
        parts += _uncertainty(frame, x, pct, float(row.U_pct), colour)
    if abs(pct) > frame.limit:
        return parts + _clipped_marker(frame, x, pct, state, tip)
    return parts + [
        f'<circle class="point {state}" cx="{_num(x)}" cy="{_num(frame.y(pct))}" r="4.5"'
        f" {_paint(state)}><title>{tip}</title></circle>"
    ]


def _not_measured(frame: _Frame, index: int, row: PointResult) -> str:
    """A grey dash on the zero line where a point was skipped or not measured."""
    reason = row.reason_skipped()
    tip = _esc(f"{row.stimulus}: {row.verdict}" + (f" ({reason})" if reason else ""))
    return (
        f'<text class="no-reading" x="{_num(frame.x(index))}" y="{_num(frame.y(0.0) + 4)}"'
        f' text-anchor="middle" fill="{GREY}">—<title>{tip}</title></text>'
    )


def _error_point(frame: _Frame, index: int, row: PointResult) -> str:
    """Everything drawn for one point, grouped under its key."""
    state = row.verdict
    parts = [f'<g class="test-point {_esc(state)}" data-key="{_esc(row.key)}">']
    parts += _acceptance(frame, index, row)
    if row.reading is None:
        parts.append(_not_measured(frame, index, row))
    else:
        parts += _measured(frame, index, row)
    parts.append(_stimulus_label(frame, index, str(row.stimulus)))
    return "".join(parts) + "</g>"


def error_chart(range_info: RangeEntry, rows: list[PointResult]) -> str:
    """The errors of one range as percent of tolerance, against the tolerance band.

    Parameters
    ----------
    range_info
        One of the record's ranges; only its ``id`` is read.
    rows
        That range's rows of the record, in the order to draw them. Read: ``reading``,
        ``percent_of_tolerance``, ``verdict``, ``stimulus``, ``key``; when not none: ``error``
        (for a zero tolerance), ``U_pct``, ``accept_low_pct``, ``accept_high_pct``,
        ``skip_reason``.

    Returns
    -------
    str
        A standalone ``<svg>`` element, or ``""`` when there are no rows.
    """
    if not rows:
        return ""
    frame, height = _frame(rows)
    body = _axes(frame)
    body += [_error_point(frame, i, row) for i, row in enumerate(rows)]
    label = f"Range {range_info.id}: error of each point as a percent of its tolerance"
    return _svg("error-chart", height, label, body)


# ---------------------------------------------------------------------------------------------
# Arc chart

# Radii, outward: point labels, the expected pointer (crossing the sectors), the allowed
# sectors with the reading markers on their middle line, the scale arc, its ticks and labels.
# Only the band near the arc is drawn: the pivot and the inner part of the pointer carry nothing.
_RADIUS = 200.0
_POINT_LABEL_RADIUS = _RADIUS - 62.0
_POINTER = (_RADIUS - 48.0, _RADIUS + 4.0)
_SECTOR = (_RADIUS - 30.0, _RADIUS - 4.0)
_MARKER_RADIUS = _RADIUS - 17.0
_LABEL_RADIUS = _RADIUS + 24.0
_VISIBLE = (-0.1, 1.1)  # fractions of scale length drawn; a pointer cannot go much past its stops
_DEFAULT_ARC = 90.0  # a scale stated in percent of length without an arc still needs a drawing


@dataclass(frozen=True)
class _Dial:
    """Where the pivot lies and how a deflection fraction becomes an angle."""

    cx: float
    cy: float
    arc: float

    def angle(self, fraction: float) -> float:
        """Degrees clockwise from vertical: ``-arc/2`` at the left stop, ``+arc/2`` at full."""
        return (fraction - 0.5) * self.arc

    def at(self, radius: float, angle: float) -> tuple[float, float]:
        rad = math.radians(angle)
        return self.cx + radius * math.sin(rad), self.cy - radius * math.cos(rad)

    def point(self, radius: float, angle: float) -> str:
        x, y = self.at(radius, angle)
        return f"{_num(x)} {_num(y)}"


def _arc_path(dial: _Dial, radius: float, start: float, end: float, sweep: int) -> str:
    """Path commands along a circle from ``start`` to ``end`` degrees, in two halves.

    Drawing through the midpoint keeps each piece under half a turn, so a scale of a full turn
    still draws and the large-arc flag is never needed.
    """
    mid = (start + end) / 2.0
    r = _num(radius)
    return (
        f" A {r} {r} 0 0 {sweep} {dial.point(radius, mid)}"
        f" A {r} {r} 0 0 {sweep} {dial.point(radius, end)}"
    )


def _sector_path(dial: _Dial, start: float, end: float) -> str:
    """An annular wedge between the sector radii from ``start`` to ``end`` degrees."""
    inner, outer = _SECTOR
    start, end = min(start, end), max(start, end)
    return (
        f"M {dial.point(outer, start)}"
        + _arc_path(dial, outer, start, end, 1)
        + f" L {dial.point(inner, end)}"
        + _arc_path(dial, inner, end, start, 0)
        + " Z"
    )


def _fraction(law, value: float | None) -> tuple[float, bool]:
    """Deflection fraction of ``value`` (``None`` is infinity) held to the visible part.

    Returns the fraction and whether it had to be held back.
    """
    value = math.inf if value is None else float(value)
    try:
        fraction = law.fraction(value)
    except ZeroDivisionError:  # a negative resistance of exactly minus the centre value
        fraction = math.inf
    if math.isnan(fraction):
        fraction = math.inf if value > 0 else -math.inf
    held = min(max(fraction, _VISIBLE[0]), _VISIBLE[1])
    return held, held != fraction


def _ohms_label(value: float) -> str:
    if math.isinf(value):
        return "∞"
    if value == 0:
        return "0"
    for factor, prefix in ((1e6, "M"), (1e3, "k")):
        if value >= factor * 0.9999999995:
            return f"{value / factor:.3g}{prefix}"
    return f"{value:.3g}"


# Which scale values win a label when space is short: the ends, then 1, 5 and 2 of each decade.
_RANK = {1: 1, 5: 2, 2: 3}
_MINOR = 4


def _ohms_candidates(law) -> list[tuple[int, float, str]]:
    """(rank, fraction, label) of 0, ∞ and 1..9 of each decade near the centre value."""
    decade = 10.0 ** math.floor(math.log10(law.centre))
    found = [(0, law.fraction(0.0), "0"), (0, law.fraction(math.inf), "∞")]
    for power in range(-2, 3):
        for mantissa in range(1, 10):
            value = mantissa * decade * 10.0**power
            fraction = law.fraction(value)
            if 0.015 <= fraction <= 0.985:
                found.append((_RANK.get(mantissa, _MINOR), fraction, _ohms_label(value)))
    return found


def _nice_step(rough: float) -> float:
    """The smallest of 1, 2, 5 times a power of ten not below ``rough``."""
    power = 10.0 ** math.floor(math.log10(rough))
    return next(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= rough * 0.9999999995)


def _linear_candidates(law) -> tuple[list[tuple[int, float, str]], str]:
    """(rank, fraction, label) of round values along a linear scale, and the labels' prefix."""
    span = law.high - law.low
    step = _nice_step(abs(span) / 6.0)
    minor = step / (4.0 if round(step / 10.0 ** math.floor(math.log10(step))) == 2 else 5.0)
    factor, prefix = prefix_for(max(abs(law.low), abs(law.high)))
    found = [(0, 0.0, f"{law.low / factor:.4g}"), (0, 1.0, f"{law.high / factor:.4g}")]
    per_major = round(step / minor)
    for i in range(1, int(abs(span) / minor + 1e-6) + 1):
        value = law.low + math.copysign(i * minor, span)
        rank = 1 if i % per_major == 0 else _MINOR
        found.append((rank, law.fraction(value), f"{value / factor:.4g}"))
    return found, prefix


_TICK_GAP = 0.9  # degrees: the closest two ticks may stand


def _space_out(
    dial: _Dial, candidates: list[tuple[int, float, str]]
) -> list[tuple[float, str | None, bool]]:
    """Keep the ticks, and the labels, that fit, most important first.

    Returns (fraction, label or None, major) for each tick kept, from the left stop. Kept
    ticks and labels are held sorted by angle, so each newcomer is checked against its two
    neighbours only (kept labels never overlap, so no farther one can reach it).
    """
    ticks: list[tuple[float, str | None, bool]] = []
    kept: list[float] = []
    labels: list[tuple[float, float]] = []  # (angle, half width in degrees)
    per_degree = math.radians(1.0) * _LABEL_RADIUS
    for rank, fraction, label in sorted(candidates, key=lambda c: (c[0], c[1])):
        angle = dial.angle(fraction)
        at = bisect.bisect(kept, angle)
        if rank and any(
            abs(angle - kept[i]) < _TICK_GAP for i in (at - 1, at) if 0 <= i < len(kept)
        ):
            continue
        kept.insert(at, angle)
        fits = rank < _MINOR and _label_fits(
            labels, angle, (len(label) * CHAR_WIDTH / 2.0 + 2.0) / per_degree
        )
        ticks.append((fraction, label if fits else None, rank < _MINOR))
    return sorted(ticks)


def _label_fits(labels: list[tuple[float, float]], angle: float, half: float) -> bool:
    """Whether a label ``half`` degrees either side of ``angle`` clears its neighbours; if so, keep
    it."""
    at = bisect.bisect(labels, (angle, half))
    for i in (at - 1, at):
        if 0 <= i < len(labels) and abs(angle - labels[i][0]) < half + labels[i][1]:
            return False
    labels.insert(at, (angle, half))
    return True


def _scale(dial: _Dial, range_info: RangeEntry, law) -> tuple[list[str], str]:
    """The scale arc with its ticks and labels, and the unit the labels are in."""
    half = dial.arc / 2.0
    parts = [
        f'<path class="scale" d="M {dial.point(_RADIUS, -half)}'
        f'{_arc_path(dial, _RADIUS, -half, half, 1)}" fill="none" stroke="{INK}"'
        ' stroke-width="1.5"/>'
    ]
    if range_info.scale == "linear":
        candidates, prefix = _linear_candidates(law)
        unit = prefix + str(range_info.unit)
    else:
        candidates, unit = _ohms_candidates(law), "Ω"
    for fraction, label, major in _space_out(dial, candidates):
        angle = dial.angle(fraction)
        kind, length = ("major", 12.0) if major else ("minor", 6.0)
        x0, y0 = dial.at(_RADIUS, angle)
        x1, y1 = dial.at(_RADIUS + length, angle)
        parts.append(
            f'<line class="tick {kind}" x1="{_num(x0)}" y1="{_num(y0)}" x2="{_num(x1)}"'
            f' y2="{_num(y1)}" stroke="{INK}" stroke-width="1"/>'
        )
        if label is not None:
            x, y = dial.at(_LABEL_RADIUS, angle)
            parts.append(
                f'<text class="tick-label" x="{_num(x)}" y="{_num(y + 4)}" text-anchor="middle"'
                f' fill="{INK}">{_esc(label)}</text>'
            )
    return parts, unit


def _arc_tip(row: PointResult) -> str:
    unit = str(row.unit)
    low = format_quantity(row.low, unit)
    high = format_quantity(row.high, unit)
    read = "not read" if row.reading is None else "read " + format_quantity(row.reading, unit)
    return _esc(f"{row.stimulus}: allowed {low} to {high}, {read}, {row.verdict}")


def _arc_point(dial: _Dial, law, row: PointResult) -> str:
    """Allowed sector, expected pointer, reading marker and label of one point."""
    state = row.verdict
    start = dial.angle(_fraction(law, row.low)[0])
    end = dial.angle(_fraction(law, row.high)[0])
    expected = dial.angle(_fraction(law, row.nominal)[0])
    x0, y0 = dial.at(_POINTER[0], expected)
    x1, y1 = dial.at(_POINTER[1], expected)
    parts = [
        f'<g class="test-point {_esc(state)}" data-key="{_esc(row.key)}">'
        f"<title>{_arc_tip(row)}</title>",
        f'<path class="sector" d="{_sector_path(dial, start, end)}" fill="{BAND_FILL}"'
        f' stroke="{PASS}" stroke-width="0.8"/>',
        f'<line class="expected" x1="{_num(x0)}" y1="{_num(y0)}" x2="{_num(x1)}" y2="{_num(y1)}"'
        f' stroke="{MUTED}" stroke-width="1" stroke-dasharray="4 2"/>',
    ]
    if row.reading is not None:
        parts.append(_reading_marker(dial, law, row))
    x, y = dial.at(_POINT_LABEL_RADIUS, expected)
    parts.append(
        f'<text class="label" x="{_num(x)}" y="{_num(y + 4)}" text-anchor="middle"'
        f' fill="{INK}">{_esc(row.stimulus)}</text>'
    )
    return "".join(parts) + "</g>"


def _reading_marker(dial: _Dial, law, row: PointResult) -> str:
    fraction, held = _fraction(law, row.reading)
    state = _state(row)
    x, y = dial.at(_MARKER_RADIUS, dial.angle(fraction))
    kind = f"reading {state} clipped" if held else f"reading {state}"
    edge = "" if state.startswith("conditional") else ' stroke="#ffffff" stroke-width="1"'
    return f'<circle class="{kind}" cx="{_num(x)}" cy="{_num(y)}" r="4.5" {_paint(state)}{edge}/>'


def _dial(arc: float) -> tuple[_Dial, float]:
    """The dial for an ``arc``-degree scale, centred across the chart, and the chart height.

    The lowest thing drawn is either the inner edge of the point labels or the outer edge of
    the tick labels, at the middle of the scale or at its ends; a line for the unit follows.
    """
    top = _LABEL_RADIUS + 16.0
    dial = _Dial(cx=WIDTH / 2.0, cy=top + 4.0, arc=arc)
    cosines = (1.0, math.cos(math.radians(min(arc, 360.0) / 2.0)))
    lowest = max(-r * c for r in (_POINT_LABEL_RADIUS - 10.0, top) for c in cosines)
    return dial, dial.cy + lowest + 26.0


def arc_chart(range_info: RangeEntry, rows: list[PointResult]) -> str:
    """The scale arc of one range with each point's allowed sector and reading.

    Only the rows whose tolerance is stated along the arc (``domain == "deflection"``) are
    drawn; the others are the business of :func:`error_chart`.

    Parameters
    ----------
    range_info
        One of the record's ranges. Read: ``id``, ``scale`` (``linear``,
        ``series-ohms`` or ``shunt-ohms``), ``arc`` (degrees; 90 when absent), ``centre`` (ohms
        scales), ``full_scale`` (linear scales), ``unit``.
    rows
        That range's rows of the record. Read: ``domain``, ``nominal``, ``low``,
        ``high`` (``None`` is the infinity end), ``reading``, ``verdict``,
        ``percent_of_tolerance``, ``stimulus``, ``unit``, ``key``.

    Returns
    -------
    str
        A standalone ``<svg>`` element, or ``""`` when no row is stated along the arc.

    Raises
    ------
    ValueError
        If the range's scale law is unknown or lacks its centre or full-scale value.
    """
    arc_rows = [row for row in rows if row.domain == "deflection"]
    if not arc_rows:
        return ""
    law = make_law(
        range_info.scale,
        full_scale=range_info.full_scale,
        centre=range_info.centre,
    )
    dial, height = _dial(float(range_info.arc or _DEFAULT_ARC))
    body, unit = _scale(dial, range_info, law)
    body += [_arc_point(dial, law, row) for row in arc_rows]
    body.append(
        f'<text class="unit" x="8" y="{_num(height - 8)}" fill="{MUTED}">'
        f"scale in {_esc(unit)}</text>"
    )
    label = f"Range {range_info.id}: allowed sector and reading of each point on the scale arc"
    return _svg("arc-chart", height, label, body)
