"""The certificate's pictures: the error chart and the scale-arc chart, read back as SVG."""

from __future__ import annotations

import copy
import math
import re
import xml.etree.ElementTree as ET

import pytest

from verirun.certificate import charts
from verirun.record.documents import PointResult, RangeEntry, validate_row

SVG = "{http://www.w3.org/2000/svg}"

# Ranges and rows shaped like the demo run record's ``ranges`` and ``points`` entries.
# The scales span a 90° arc; the ohms range has a 16 Ω centre and ± 3° of arc (HALF of the length).
HALF = 3 / 90
LINEAR_RANGE = {
    "id": "dcv-10",
    "function": "dc-voltage",
    "function_name": "DC voltage",
    "unit": "V",
    "scale": "linear",
    "full_scale": 10.0,
    "centre": None,
    "arc": 90.0,
    "accuracy": ["± 2 % of full scale"],
    "read_on": "DC scale, 0 to 10",
}
SERIES_RANGE = {
    "id": "ohm-x1",
    "function": "resistance",
    "function_name": "resistance",
    "unit": "Ω",
    "scale": "series-ohms",
    "full_scale": None,
    "centre": 16.0,
    "arc": 90.0,
    "accuracy": ["± 3° of arc"],
    "read_on": "ohms scale, multiply by 1",
}
SHUNT_RANGE = {**SERIES_RANGE, "id": "ohm-shunt", "scale": "shunt-ohms"}


def value_row(
    index: int,
    nominal: float,
    reading: float | None,
    pct: float | None,
    verdict: str = "pass",
    **extra,
) -> dict:
    """A value-domain point of the 10 V range (± 0.2 V, as 2 % of 10 V full scale)."""
    row = {
        "index": index,
        "key": f"dcv-10@{nominal}",
        "range": "dcv-10",
        "unit": "V",
        "nominal": nominal,
        "frequency": None,
        "stimulus": f"{nominal:g} V DC",
        "low": nominal - 0.2,
        "high": nominal + 0.2,
        "domain": "value",
        "half_width": 0.2,
        "accuracy": "± 2 % of full scale",
        "verdict": verdict,
        "reading": reading,
    }
    if reading is not None:
        row.update(error=reading - nominal, error_unit="V", percent_of_tolerance=pct)
    row.update(extra)
    return row


def arc_row(
    nominal: float,
    low: float,
    high: float | None,
    reading: float | None,
    verdict: str = "pass",
    pct: float | None = None,
    unit: str = "Ω",
) -> dict:
    """A deflection-domain point (tolerance stated along the arc)."""
    row = {
        "index": 0,
        "key": f"pt@{nominal}",
        "range": "r",
        "unit": unit,
        "nominal": nominal,
        "frequency": None,
        "stimulus": f"{nominal:g} {unit}",
        "low": low,
        "high": high,
        "domain": "deflection",
        "half_width": HALF,
        "accuracy": "± 3° of arc",
        "verdict": verdict,
        "reading": reading,
    }
    if reading is not None:
        row.update(percent_of_tolerance=pct if pct is not None else 0.0, error_unit="deg")
    return row


#: What a record's row holds where the rows above say nothing: no figure, no budget.
ROW_DEFAULTS = {
    "limits_text": "",
    "budget": [],
    **dict.fromkeys(
        (
            "typed time error error_unit percent_of_tolerance U U_spec k tur conformance"
            " accept_low accept_high U_pct accept_low_pct accept_high_pct reported"
        ).split()
    ),
}


def error_chart(range_info: dict, rows: list[dict]) -> str:
    """The error chart of rows written as dicts, made the record's typed rows first (as the
    certificate passes them)."""
    return charts.error_chart(RangeEntry.model_validate(range_info), [_typed(r) for r in rows])


def arc_chart(range_info: dict, rows: list[dict]) -> str:
    """The arc chart of rows written as dicts, made the record's typed rows first."""
    return charts.arc_chart(RangeEntry.model_validate(range_info), [_typed(r) for r in rows])


def _typed(row: dict) -> PointResult:
    return validate_row({**ROW_DEFAULTS, **row})


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def find(root: ET.Element, tag: str, *classes: str) -> list[ET.Element]:
    """Elements ``tag`` whose class attribute holds every one of ``classes``."""
    return [el for el in root.iter(SVG + tag) if set(classes) <= set(el.get("class", "").split())]


def group(root: ET.Element, key: str) -> ET.Element:
    (found,) = [g for g in find(root, "g", "test-point") if g.get("data-key") == key]
    return found


def band_extent(root: ET.Element) -> tuple[float, float]:
    (band,) = find(root, "rect", "band")
    top = float(band.get("y"))
    return top, top + float(band.get("height"))


def path_points(d: str) -> list[tuple[str, tuple[float, float]]]:
    """(command, end point) of each M, L and A command of a path."""
    tokens = re.findall(r"[MLAZ]|-?\d+(?:\.\d+)?", d)
    points, i = [], 0
    while i < len(tokens):
        cmd = tokens[i]
        if cmd == "Z":
            i += 1
            continue
        skip = 5 if cmd == "A" else 0  # rx ry rotation large-arc sweep
        x, y = tokens[i + 1 + skip], tokens[i + 2 + skip]
        points.append((cmd, (float(x), float(y))))
        i += 3 + skip
    return points


def dial_centre(root: ET.Element) -> tuple[float, float]:
    """Centre of the scale arc: its first arc piece ends at the top, one radius above it."""
    (scale,) = find(root, "path", "scale")
    radius = float(re.search(r"A (\S+)", scale.get("d")).group(1))
    _, (x_top, y_top) = path_points(scale.get("d"))[1]
    return x_top, y_top + radius


def angle(centre: tuple[float, float], x: float, y: float) -> float:
    """Degrees clockwise from vertical of (x, y) seen from ``centre``."""
    return math.degrees(math.atan2(x - centre[0], centre[1] - y))


def sector_angles(root: ET.Element, key: str) -> tuple[float, float]:
    """Angles of the two ends of the allowed sector of point ``key``, lower first."""
    (sector,) = find(group(root, key), "path", "sector")
    points = path_points(sector.get("d"))
    centre = dial_centre(root)
    start, end = angle(centre, *points[0][1]), angle(centre, *points[2][1])
    return min(start, end), max(start, end)


def pointer_angles(root: ET.Element, key: str) -> tuple[float, float]:
    """Angles of both ends of the expected pointer of point ``key``."""
    (line,) = find(group(root, key), "line", "expected")
    centre = dial_centre(root)
    return (
        angle(centre, float(line.get("x1")), float(line.get("y1"))),
        angle(centre, float(line.get("x2")), float(line.get("y2"))),
    )


class TestErrorChart:
    @pytest.mark.parametrize("pct", [116.16, -130.0])
    def test_out_of_tolerance_point_outside_band(self, pct):
        """A point beyond its tolerance is drawn in the fail colour outside the shaded band."""
        # 116.16 % is the failing 16 kΩ point of the demo: 13.7 kΩ read at (16/29.7 - 0.5) × 90°
        # = +3.485° of a ± 3° tolerance (derived from f = Rc/(Rc+Rx)).
        rows = [value_row(0, 2.0, 2.05, 25.0), value_row(1, 4.0, 4.3, pct, verdict="fail")]
        root = parse(error_chart(LINEAR_RANGE, rows))
        top, bottom = band_extent(root)
        (marker,) = find(group(root, "dcv-10@4.0"), "circle", "point", "fail")
        y = float(marker.get("cy"))
        assert y < top if pct > 0 else y > bottom
        (good,) = find(root, "circle", "point", "pass")
        assert marker.get("fill") != good.get("fill")

    def test_marker_is_the_rows_own_statement(self):
        """The chart draws the statement the row carries and never decides one of its own, so a
        marker cannot contradict the verdict column (ISO/IEC 17025:2017 7.8.6)."""
        rows = [
            value_row(0, 2.0, 2.3, 150.0, verdict="fail"),
            value_row(1, 4.0, 4.19, 95.0, verdict="fail"),
        ]  # rejected by a guard band
        root = parse(error_chart(LINEAR_RANGE, rows))
        assert len(find(root, "circle", "point", "fail")) == 2
        assert not find(root, "circle", "point", "pass")

    @pytest.mark.parametrize("verdict", ["conditional-pass", "conditional-fail"])
    def test_conditional_markers_stand_apart(self, verdict):
        """A conditional statement (ILAC-G8:09/2019 4.2.3) is drawn hollow in a colour of its
        own, unlike both pass and fail."""
        rows = [
            value_row(0, 2.0, 2.05, 25.0),
            value_row(1, 4.0, 4.19, 95.0, verdict=verdict),
            value_row(2, 6.0, 6.1, 50.0, verdict="fail"),
        ]
        root = parse(error_chart(LINEAR_RANGE, rows))
        (marker,) = find(root, "circle", "point", verdict)
        (good,) = find(root, "circle", "point", "pass")
        (bad,) = find(root, "circle", "point", "fail")
        assert marker.get("fill") == "#ffffff"
        assert marker.get("stroke") not in (good.get("fill"), bad.get("fill"))

    def test_in_tolerance_point_inside_band(self):
        """A point within its tolerance is drawn inside the band, at its percent of tolerance."""
        root = parse(error_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.05, 25.0)]))
        top, bottom = band_extent(root)
        (marker,) = find(root, "circle", "point", "pass")
        y = float(marker.get("cy"))
        assert top < y < bottom
        # +25 % lies a quarter of the band's half-height above its middle line.
        assert y == pytest.approx((top + bottom) / 2 - 0.25 * (bottom - top) / 2, abs=0.02)

    def test_limit_itself_is_inside(self):
        """A reading exactly on a limit (100 %) passes and is drawn on the band's edge."""
        root = parse(error_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.2, 100.0)]))
        top, _ = band_extent(root)
        (marker,) = find(root, "circle", "point", "pass")
        assert float(marker.get("cy")) == pytest.approx(top, abs=0.01)

    def test_uncertainty_bar_centred_on_point(self):
        """With U_pct the point carries a vertical bar centred on it, U_pct up and down."""
        rows = [value_row(0, 2.0, 2.05, 25.0, U_pct=30.0)]
        root = parse(error_chart(LINEAR_RANGE, rows))
        top, bottom = band_extent(root)
        (marker,) = find(root, "circle", "point")
        (bar,) = find(root, "line", "uncertainty")
        cx, cy = float(marker.get("cx")), float(marker.get("cy"))
        assert float(bar.get("x1")) == float(bar.get("x2")) == cx
        y1, y2 = float(bar.get("y1")), float(bar.get("y2"))
        assert (y1 + y2) / 2 == pytest.approx(cy, abs=0.01)
        # The band spans 200 % of tolerance, so ± 30 % is 60/200 of its height.
        assert abs(y1 - y2) == pytest.approx(0.3 * (bottom - top), abs=0.02)

    def test_no_uncertainty_bar_without_u(self):
        """A row without U_pct gets no uncertainty bar."""
        root = parse(error_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.05, 25.0)]))
        assert not find(root, "line", "uncertainty")

    def test_acceptance_limits_dashed(self):
        """Acceptance limits of a guarded rule are dashed lines at their percent of tolerance."""
        rows = [
            value_row(0, 2.0, 2.05, 25.0, U_pct=30.0, accept_low_pct=-70.0, accept_high_pct=70.0)
        ]
        root = parse(error_chart(LINEAR_RANGE, rows))
        top, bottom = band_extent(root)
        middle, half = (top + bottom) / 2, (bottom - top) / 2
        (high,) = find(root, "line", "acceptance", "high")
        (low,) = find(root, "line", "acceptance", "low")
        assert float(high.get("y1")) == pytest.approx(middle - 0.7 * half, abs=0.02)
        assert float(low.get("y1")) == pytest.approx(middle + 0.7 * half, abs=0.02)
        assert high.get("stroke-dasharray") and low.get("stroke-dasharray")
        assert high.get("y1") == high.get("y2")

    def test_no_acceptance_lines_without_limits(self):
        """Rows without acceptance limits get no acceptance lines."""
        root = parse(error_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.05, 25.0)]))
        assert not find(root, "line", "acceptance")

    def test_absurd_value_marked_at_edge(self):
        """A wildly wrong point is held at the plot's edge as a marked triangle with its value."""
        rows = [value_row(0, 2.0, 12.0, 5000.0, verdict="fail")]
        root = parse(error_chart(LINEAR_RANGE, rows))
        top, _ = band_extent(root)
        (frame,) = find(root, "rect", "frame")
        (marker,) = find(root, "polygon", "point", "fail", "clipped")
        ys = [float(p.split(",")[1]) for p in marker.get("points").split()]
        assert all(float(frame.get("y")) <= y < top for y in ys)
        assert min(ys) == pytest.approx(float(frame.get("y")), abs=0.01)  # apex on the edge
        assert any(t.text == "+5000 %" for t in find(root, "text", "clipped-value"))

    def test_zero_tolerance_error_still_shown(self):
        """A nonzero error against a zero tolerance (no percent) is shown at the edge, not
        hidden."""
        row = value_row(0, 2.0, 2.1, None, verdict="fail")
        root = parse(error_chart(LINEAR_RANGE, [row]))
        assert find(root, "polygon", "point", "fail", "clipped")

    @pytest.mark.parametrize("verdict", ["skipped", "not-measured"])
    def test_point_without_reading_gets_dash_only(self, verdict):
        """A point with no reading shows a grey dash and no marker."""
        rows = [value_row(0, 2.0, 2.05, 25.0), value_row(1, 4.0, None, None, verdict=verdict)]
        root = parse(error_chart(LINEAR_RANGE, rows))
        empty = group(root, "dcv-10@4.0")
        assert not find(empty, "circle", "point") and not find(empty, "polygon", "point")
        (dash,) = find(empty, "text", "no-reading")
        assert dash.text == "—"
        assert find(group(root, "dcv-10@2.0"), "circle", "point")

    def test_unbounded_window(self):
        """A point whose window has no upper limit is still drawn at its percent of tolerance."""
        row = value_row(0, 600.0, 590.0, 40.0)
        row.update(high=None, domain="deflection", unit="Ω", stimulus="600 Ω")
        root = parse(error_chart(SERIES_RANGE, [row]))
        top, bottom = band_extent(root)
        (marker,) = find(root, "circle", "point", "pass")
        assert top < float(marker.get("cy")) < bottom

    def test_points_in_order_with_stimulus_labels(self):
        """Points run left to right in row order, each labelled with its stimulus."""
        rows = [value_row(i, v, v, 0.0) for i, v in enumerate([2.0, 4.0, 6.0])]
        root = parse(error_chart(LINEAR_RANGE, rows))
        labels = find(root, "text", "stimulus")
        assert [t.text for t in labels] == ["2 V DC", "4 V DC", "6 V DC"]
        xs = [float(c.get("cx")) for c in find(root, "circle", "point")]
        assert xs == sorted(xs) and len(set(xs)) == 3

    def test_same_input_same_bytes(self):
        """Rendering the same rows twice, or a copy of them, gives identical text."""
        rows = [
            value_row(
                0,
                2.0,
                2.05,
                24.99999999999991,
                U_pct=12.3456,
                accept_low_pct=-87.6,
                accept_high_pct=87.6,
            ),
            value_row(1, 4.0, None, None, verdict="skipped"),
        ]
        first = error_chart(LINEAR_RANGE, rows)
        assert error_chart(copy.deepcopy(LINEAR_RANGE), copy.deepcopy(rows)) == first
        assert error_chart(LINEAR_RANGE, rows) == first

    def test_text_is_escaped(self):
        """A range id or stimulus holding markup comes out as text, never as an element."""
        evil = "<script>go()</script>"  # short enough to be shown whole
        row = value_row(0, 2.0, 2.05, 25.0, stimulus=evil, key='k"&<')
        svg = error_chart({**LINEAR_RANGE, "id": evil}, [row])
        assert "<script" not in svg
        root = parse(svg)
        assert evil in root.find(SVG + "title").text
        assert evil in root.get("aria-label")
        assert [t.text for t in find(root, "text", "stimulus")] == [evil]
        assert group(root, 'k"&<') is not None

    def test_standalone_svg(self):
        """The chart is one standalone SVG element with an accessible name, 180 mm wide."""
        svg = error_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.05, 25.0)])
        root = parse(svg)
        assert root.tag == SVG + "svg" and svg.startswith("<svg ")
        assert root.get("role") == "img" and "dcv-10" in root.get("aria-label")
        assert list(root)[0].tag == SVG + "title"
        assert root.get("width") == "180mm"
        assert len(root.get("viewBox").split()) == 4

    def test_no_rows_no_chart(self):
        """A range without rows has no chart."""
        assert error_chart(LINEAR_RANGE, []) == ""


def series_limits(centre: float, nominal: float, half: float) -> tuple[float, float | None]:
    """Window on a series ohms scale, derived from f = Rc/(Rc+Rx) and Rx = Rc (1 - f) / f."""
    f0 = centre / (centre + nominal)
    low = centre * (1 - (f0 + half)) / (f0 + half)
    high = centre * (1 - (f0 - half)) / (f0 - half) if f0 - half > 0 else None
    return low, high


class TestArcChart:
    def test_series_centre_point_at_middle(self):
        """On a series ohms scale the expected pointer at Rx = Rc stands at the arc's middle."""
        low, high = series_limits(16.0, 16.0, HALF)
        root = parse(arc_chart(SERIES_RANGE, [arc_row(16.0, low, high, 15.6, pct=19.0)]))
        # derived from f = Rc/(Rc+Rx) = 0.5 at Rx = Rc
        inner, outer = pointer_angles(root, "pt@16.0")
        assert inner == pytest.approx(0.0, abs=0.01) and outer == pytest.approx(0.0, abs=0.01)

    def test_scale_symmetric_about_vertical(self):
        """The scale arc spans its arc in degrees, half either side of vertical."""
        root = parse(arc_chart(SERIES_RANGE, [arc_row(16.0, 14.0, 18.29, None, "not-measured")]))
        (scale,) = find(root, "path", "scale")
        points = path_points(scale.get("d"))
        centre = dial_centre(root)
        assert angle(centre, *points[0][1]) == pytest.approx(-45.0, abs=0.01)
        assert angle(centre, *points[-1][1]) == pytest.approx(45.0, abs=0.01)

    def test_linear_full_scale_point_at_right_end(self):
        """On a linear scale the full-scale point's pointer stands at the right end of the arc."""
        row = arc_row(10.0, 9.75, 10.25, 10.0, unit="V")
        root = parse(arc_chart(LINEAR_RANGE, [row]))
        # derived from f = (x - low) / (high - low) = 1 at full scale: angle +arc/2
        inner, outer = pointer_angles(root, "pt@10.0")
        assert inner == pytest.approx(45.0, abs=0.01) and outer == pytest.approx(45.0, abs=0.01)

    def test_sector_half_width_is_tolerance_in_degrees(self):
        """The allowed sector of a ± 3° point reaches 3° either side of the expected pointer."""
        # 3° on a 90° arc is 1/30 of the scale length, as in the demo's ohms ranges.
        low, high = series_limits(16.0, 16.0, HALF)
        root = parse(arc_chart(SERIES_RANGE, [arc_row(16.0, low, high, 15.6, pct=19.0)]))
        start, end = sector_angles(root, "pt@16.0")
        assert (end - start) / 2 == pytest.approx(3.0, abs=0.01)
        assert (end + start) / 2 == pytest.approx(0.0, abs=0.01)

    def test_sector_off_centre(self):
        """Off centre the sector is still ± 3° of arc about the pointer, not ± a value."""
        low, high = series_limits(16.0, 64.0, HALF)
        root = parse(arc_chart(SERIES_RANGE, [arc_row(64.0, low, high, 62.0, pct=15.4)]))
        # derived from f = Rc/(Rc+Rx) = 0.2 at Rx = 4 Rc: (0.2 - 0.5) * 90° = -27°
        start, end = sector_angles(root, "pt@64.0")
        assert start == pytest.approx(-30.0, abs=0.01) and end == pytest.approx(-24.0, abs=0.01)
        assert pointer_angles(root, "pt@64.0")[1] == pytest.approx(-27.0, abs=0.01)

    @pytest.mark.parametrize("rng, infinity_end", [(SERIES_RANGE, -45.0), (SHUNT_RANGE, 45.0)])
    def test_infinite_upper_limit_ends_at_infinity(self, rng, infinity_end):
        """An unbounded upper limit ends the sector at the ∞ end of the scale."""
        # Rx = 50 Rc sits 1/51 of the length from ∞ (f = Rc/(Rc+Rx) series, Rx/(Rx+Rc) shunt),
        # closer than 1/30, so its window is unbounded above; its lower limit is 1/30 inwards.
        f_inf = 1 / 51 if rng is SERIES_RANGE else 50 / 51
        inward = f_inf + HALF if rng is SERIES_RANGE else f_inf - HALF
        low = 16.0 * (1 - inward) / inward if rng is SERIES_RANGE else 16.0 * inward / (1 - inward)
        root = parse(arc_chart(rng, [arc_row(800.0, low, None, 900.0, pct=-20.0)]))
        start, end = sector_angles(root, "pt@800.0")
        limit = (inward - 0.5) * 90.0
        assert (start, end) == pytest.approx(sorted([infinity_end, limit]), abs=0.01)

    def test_reading_marker_where_reading_fell(self):
        """A failing reading is marked at its own deflection, outside the allowed sector."""
        low, high = series_limits(16000.0, 16000.0, HALF)
        rng = {**SERIES_RANGE, "id": "ohm-x1k", "centre": 16000.0}
        root = parse(arc_chart(rng, [arc_row(16000.0, low, high, 13700.0, "fail", pct=116.16)]))
        (marker,) = find(group(root, "pt@16000.0"), "circle", "reading", "fail")
        at = angle(dial_centre(root), float(marker.get("cx")), float(marker.get("cy")))
        # derived from f = Rc/(Rc+Rx): (16000/29700 - 0.5) * 90° = +3.4848°, the demo's error
        assert at == pytest.approx(3.4848, abs=0.01)
        start, end = sector_angles(root, "pt@16000.0")
        assert not start <= at <= end

    def test_point_without_reading_has_no_marker(self):
        """A point that was not read shows its pointer and sector but no reading marker."""
        rows = [
            arc_row(16.0, *series_limits(16.0, 16.0, HALF), 15.6, pct=19.0),
            arc_row(4.0, *series_limits(16.0, 4.0, HALF), None, "skipped"),
        ]
        root = parse(arc_chart(SERIES_RANGE, rows))
        unread = group(root, "pt@4.0")
        assert not find(unread, "circle", "reading")
        assert find(unread, "path", "sector") and find(unread, "line", "expected")
        assert find(group(root, "pt@16.0"), "circle", "reading", "pass")

    def test_ohms_ticks(self):
        """An ohms scale is labelled 0 and ∞ at its ends and round values where the law puts
        them."""
        root = parse(arc_chart(SERIES_RANGE, [arc_row(16.0, 14.0, 18.29, None, "not-measured")]))
        labels = find(root, "text", "tick-label")
        by_x = sorted(labels, key=lambda t: float(t.get("x")))
        assert by_x[0].text == "∞" and by_x[-1].text == "0"  # series: full deflection at 0 Ω
        assert {"1", "2", "5", "10", "20", "50", "100"} <= {t.text for t in labels}
        centre = dial_centre(root)
        majors = [
            angle(centre, float(t.get("x1")), float(t.get("y1")))
            for t in find(root, "line", "tick", "major")
        ]
        # derived from f = Rc/(Rc+Rx): 10 Ω on a 16 Ω centre scale at (16/26 - 0.5) * 90°
        assert any(a == pytest.approx((16 / 26 - 0.5) * 90, abs=0.01) for a in majors)

    def test_linear_ticks(self):
        """A linear scale is labelled from 0 at the left to full scale at the right."""
        root = parse(arc_chart(LINEAR_RANGE, [arc_row(10.0, 9.75, 10.25, 10.0, unit="V")]))
        labels = sorted(find(root, "text", "tick-label"), key=lambda t: float(t.get("x")))
        assert [t.text for t in labels] == ["0", "2", "4", "6", "8", "10"]

    def test_value_domain_range_has_no_arc_chart(self):
        """A range whose tolerances are all stated on the value gets no arc chart."""
        assert arc_chart(LINEAR_RANGE, [value_row(0, 2.0, 2.05, 25.0)]) == ""

    def test_same_input_same_bytes(self):
        """Rendering the same range twice gives identical text."""
        rows = [
            arc_row(16.0, *series_limits(16.0, 16.0, HALF), 15.6, pct=18.987341772151893),
            arc_row(800.0, 4.1, None, None, "not-measured"),
        ]
        first = arc_chart(SERIES_RANGE, rows)
        assert arc_chart(copy.deepcopy(SERIES_RANGE), copy.deepcopy(rows)) == first

    def test_text_is_escaped(self):
        """A range id or stimulus holding markup comes out as text, never as an element."""
        evil = "<script>go()</script>"  # short enough to be shown whole
        row = {**arc_row(16.0, 14.0, 18.29, 15.6, pct=19.0), "stimulus": evil}
        svg = arc_chart({**SERIES_RANGE, "id": evil}, [row])
        assert "<script" not in svg
        root = parse(svg)
        assert evil in root.find(SVG + "title").text
        assert [t.text for t in find(root, "text", "label")] == [evil]

    def test_standalone_svg(self):
        """The arc chart is one standalone SVG element with an accessible name, 180 mm wide."""
        root = parse(arc_chart(SERIES_RANGE, [arc_row(16.0, 14.0, 18.29, 15.6, pct=19.0)]))
        assert root.tag == SVG + "svg" and root.get("role") == "img"
        assert "ohm-x1" in root.get("aria-label") and list(root)[0].tag == SVG + "title"
        assert root.get("width") == "180mm"
