"""A matrix of runs under every decision rule: the certificate's statements, counts and printed
numbers agree with the record, and ``verirun window --json`` prints the same numbers.

Readings are placed on and just beyond each rule's boundaries. The checks are made here from the
printed text alone: the reading shown compared with the limits shown must give the verdict shown
(ILAC-G8:09/2019 4.2.1 to 4.2.3 define the zones; a value on a boundary takes the more favourable
one, our documented choice, common practice, no source); the counts of the four statements and
the guard-band rejections are counted here from the rows (ISO/IEC 17025:2017 7.8.6.2).
"""

from __future__ import annotations

import csv
import json
import re
from decimal import Decimal
from fractions import Fraction
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from runkit import simulated_run_args

from verirun.bench.config import load_bench
from verirun.cli import main
from verirun.evaluation import evaluate
from verirun.metrology.exact import as_written
from verirun.procedure.load import load_procedure_text
from verirun.procedure.plan import plan

DATA = Path(__file__).resolve().parents[1] / "data"
RULES = ["simple", "guarded", "non-binary", "risk"]
LABELS = {
    "PASS": "pass",
    "CONDITIONAL PASS": "conditional-pass",
    "CONDITIONAL FAIL": "conditional-fail",
    "FAIL": "fail",
}


def _text(q: Fraction, digits: int = 6) -> str:
    """A decimal an operator could type for ``q``: exact when short, else 6 significant digits."""
    d = Decimal(q.numerator) / Decimal(q.denominator)
    if Fraction(d) == q and len(d.normalize().as_tuple().digits) <= 12:
        return f"{d.normalize():f}"
    return f"{d:.{digits}g}" if "e" not in f"{d:.{digits}g}" else f"{float(d):.{digits}f}"


def _readings_for(points, rule: str, offset: int) -> list[tuple[str, str, str]]:
    """One reading per point, cycling through the boundaries of the rule's zones."""
    rows = []
    for point in points:
        base = evaluate(point, point.nominal)
        win = point.window
        candidates = [win.exact_low, win.exact_high]
        if base.exact_acceptance:
            candidates += list(base.exact_acceptance)
        if base.outer:
            candidates += list(base.outer)
        candidates = [
            c
            for c in candidates
            if isinstance(c, Fraction)
            and c > 0
            or (isinstance(c, Fraction) and point.range.law.name == "linear")
        ]
        choice = candidates[(point.index + offset) % len(candidates)]
        kind = (point.index + offset) // len(candidates) % 3
        q = Fraction(_text(choice))
        step = Fraction(1, 10**4) * max(abs(q), Fraction(1, 1000))
        q = q if kind == 0 else q + step if kind == 1 else q - step
        if point.range.law.name != "linear" and q <= 0:
            q = Fraction(_text(choice))
        rows.append((point.range.id, repr(point.nominal), _text(q)))
    return rows


@pytest.fixture(scope="module")
def matrix(tmp_path_factory):
    """Four runs of the matrix procedure, one per rule, each with its record and certificate."""
    base = (DATA / "matrix-procedure.yaml").read_text()
    bench = load_bench(DATA / "matrix-bench.yaml")
    out = {}
    for i, rule in enumerate(RULES):
        tmp = tmp_path_factory.mktemp(f"matrix-{rule}")
        text = base.replace("decision: {rule: simple}", f"decision: {{rule: {rule}}}")
        proc = tmp / "procedure.yaml"
        proc.write_text(text)
        points = plan(load_procedure_text(text, str(proc)), bench)
        readings = tmp / "readings.csv"
        with open(readings, "w", newline="") as fh:
            writer = csv.writer(fh)
            writer.writerow(["range", "at", "reading"])
            writer.writerows(_readings_for(points, rule, i * 3))
        assert (
            main(
                simulated_run_args(
                    tmp, proc, DATA / "matrix-bench.yaml", readings, serial=f"M-{rule}"
                )
            )
            == 0
        )
        (run,) = (tmp / "runs").iterdir()
        record = json.loads((run / "record.json").read_text())
        (cert,) = (tmp / "reports").glob("*.html")
        out[rule] = (record, BeautifulSoup(cert.read_text(encoding="utf-8"), "html.parser"), points)
        STOPS[rule] = json.loads((run / "journal.jsonl").read_text().splitlines()[-1])
    return out


#: The stop document each run of the matrix journaled last.
STOPS: dict[str, dict] = {}


_NUMBER = re.compile(r"^(-?\d+(?:\.\d+)?|-?∞) ?(.*)$")


def _number(text: str) -> tuple[Fraction | float, str]:
    """A printed quantity: its number, exactly as printed, and its unit text."""
    match = _NUMBER.match(text.strip())
    assert match, text
    number = match[1]
    value = float("inf") if number == "∞" else float("-inf") if number == "-∞" else Fraction(number)
    return value, match[2]


def _printed_verdict(rule: str, cells: dict) -> str:
    """The verdict the printed numbers give, worked out from the printed text alone."""
    r, unit = _number(cells["reading"])
    low, u1 = _number(cells["low"])
    high_text = cells["high"].replace(" (unbounded)", "")
    high, u2 = _number(high_text)
    units = {unit, u1} | ({u2} if high != float("inf") else set())
    assert len(units) == 1, cells  # one SI prefix within a row
    within = low <= r <= high
    if rule == "simple":
        return "pass" if within else "fail"
    accept = cells["acceptance"]
    accepted = False
    if accept != "none":
        a, b = (part.strip() for part in accept.split(" to "))
        (a_low, ua), (a_high, ub) = _number(a), _number(b)
        assert {ua} | ({ub} if a_high != float("inf") else set()) == units, cells
        accepted = a_low <= r <= a_high
    if rule != "non-binary":
        return "pass" if accepted else "fail"
    if accepted:
        return "pass"
    if within:
        return "conditional-pass"
    o_low, o_high = (_number(part.strip())[0] for part in cells["outer"].split(" to "))
    return "conditional-fail" if o_low <= r <= o_high else "fail"


def _rows(soup: BeautifulSoup, rule: str) -> list[dict]:
    table_rows = []
    for table in soup.select("table.results"):
        heads = [th.get_text(" ", strip=True) for th in table.select("thead th")]
        for tr in table.select("tbody tr"):
            cells = [td.get_text(" ", strip=True) for td in tr.find_all("td")]
            named = dict(zip(heads, cells))
            row = {
                "key": tr["data-key"],
                "reading": named["Reading"],
                "low": named["Lower limit"],
                "high": named["Upper limit"],
                "verdict": LABELS[named["Verdict"].split(" (")[0]],
                "U": named["U (k = 2)"],
                "error": named["Error"],
                "tur": named["TUR"],
            }
            if rule != "simple":
                row["acceptance"] = named["Acceptance limits"]
            if rule == "non-binary":
                row["outer"] = named["Conditional-fail limits"]
            table_rows.append(row)
    return table_rows


@pytest.mark.parametrize("rule", RULES)
class TestCertificateMatrix:
    def test_printed_numbers_give_the_printed_verdict(self, matrix, rule):
        """In every row the reading shown against the limits shown gives the verdict shown."""
        _, soup, _ = matrix[rule]
        rows = _rows(soup, rule)
        assert len(rows) == 20
        for row in rows:
            assert _printed_verdict(rule, row) == row["verdict"], row

    def test_certificate_verdicts_are_the_records(self, matrix, rule):
        """Each row's printed statement is the record's, and the readings are shown as typed."""
        record, soup, _ = matrix[rule]
        by_key = {row["key"]: row for row in record["points"]}
        for row in _rows(soup, rule):
            stored = by_key[row["key"]]
            assert row["verdict"] == stored["verdict"]
            typed = Fraction(stored["typed"].split()[0])
            shown, _ = _number(row["reading"])
            assert shown * 1 == typed or Decimal(row["reading"].split()[0]) == Decimal(
                stored["typed"]
            ), row
            assert "+0 " not in row["error"] and "-0 " not in row["error"]

    def test_statement_counts_are_the_rows(self, matrix, rule):
        """The statement of conformity counts all four statements as the rows give them and
        names how many rejections lie within tolerance (the guard band's) (ISO/IEC 17025:2017
        7.8.6.2, ILAC-G8:09/2019 4.2.2 and 4.2.3)."""
        record, soup, _ = matrix[rule]
        counts = {v: 0 for v in LABELS.values()}
        guard = outside = 0
        for row in record["points"]:
            counts[row["verdict"]] += 1
            if row["verdict"] in ("fail", "conditional-fail"):
                inside = (
                    as_written(row["low"])
                    <= as_written(row["reading"])
                    <= (float("inf") if row["high"] is None else as_written(row["high"]))
                )
                guard += inside
                outside += not inside
        overall = soup.select_one("#overall").get_text(" ", strip=True)
        expected = (
            f"{counts['pass']} pass, {counts['conditional-pass']} conditional pass,"
            f" {counts['conditional-fail']} conditional fail, {counts['fail']} fail"
        )
        assert expected in overall
        for key, count in counts.items():
            assert record["summary"][key] == count
        # The run's own tally, journaled as it stopped, knows the four statements too.
        assert STOPS[rule]["kind"] == "stop"
        assert STOPS[rule]["counts"] == {**counts, "skipped": 0}
        if guard:
            assert f"{guard} {'lies' if guard == 1 else 'lie'} within" in overall
        if outside:
            assert f"{outside} {'lies' if outside == 1 else 'lie'} outside" in overall
        assert "no results were measured" not in overall.lower()
        if counts["conditional-pass"]:
            assert "A conditional pass means" in overall
        if counts["conditional-fail"]:
            assert "A conditional fail means" in overall
        if rule == "non-binary":
            assert (
                counts["conditional-pass"] + counts["conditional-fail"] > 0
            )  # the matrix reaches them

    def test_window_json_agrees_with_the_certificate(self, matrix, rule, capsys):
        """``verirun window --json`` with the point's own terms prints every number as the
        certificate does: limits, acceptance, U, the reading, the error, the interval, TUR."""
        record, soup, points = matrix[rule]
        printed = {row["key"]: row for row in _rows(soup, rule)}
        by_key = {row["key"]: row for row in record["points"]}
        args_of = {
            "dcv-20": ["--full-scale", "20V", "--percent-fs", "1", "--resolution", "0.05V"],
            "ohm-s": [
                "--scale",
                "series-ohms",
                "--centre",
                "10",
                "--arc",
                "90",
                "--degrees",
                "2",
                "--resolution",
                "0.5deg",
            ],
            "ohm-p": [
                "--scale",
                "shunt-ohms",
                "--centre",
                "50",
                "--arc",
                "90",
                "--percent-length",
                "2",
                "--resolution",
                "0.5%",
            ],
        }
        for point in points:
            if point.range.id not in args_of:
                continue
            row = by_key[point.key]
            (calibrator,) = [t for t in row["budget"] if t["name"].startswith("applied value")]
            assert (
                main(
                    [
                        "window",
                        *args_of[point.range.id],
                        "--at",
                        repr(point.nominal),
                        "--u-applied",
                        repr(calibrator["u"]),
                        "--rule",
                        rule,
                        "--reading",
                        row["typed"],
                        "--json",
                    ]
                )
                == 0
            )
            out = json.loads(capsys.readouterr().out)
            texts, cells = out["text"], printed[point.key]
            assert texts["reading"] == cells["reading"]
            assert texts["low"] == cells["low"]
            assert (texts["high"] if point.window.bounded else "∞ (unbounded)") == cells["high"]
            assert texts["error"] == cells["error"]
            assert cells["U"].startswith(texts["U_spec"])
            if point.window.domain == "deflection":  # U along the arc, the interval in ohms beneath
                assert cells["U"] == f"{texts['U_spec']} interval {texts['interval']}"
            else:
                assert cells["U"] == texts["U_spec"]
            if rule != "simple":
                accept = (
                    f"{texts['accept_low']} to {texts['accept_high']}"
                    if texts["accept_low"]
                    else "none"
                )
                assert accept == cells["acceptance"]
            if rule == "non-binary":
                assert f"{texts['outer_low']} to {texts['outer_high']}" == cells["outer"]
            assert out["verdict"] == row["verdict"]
            tur = cells["tur"].replace("*", "").strip()
            assert (tur == "—") if out["tur"] is None else tur == f"{out['tur']:.1f}"


# --- The same check on generated single points, every rule, many readings ---------------------

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from verirun.evaluation import Site, shown  # noqa: E402
from verirun.metrology import decision, scales, tolerance, uncertainty  # noqa: E402


def _site(kind: str, nominal: str, spec: str, u: float, rule: str) -> Site:
    if kind == "linear":
        law = scales.Linear(high=20.0)
        ctx = tolerance.RangeContext(law=law, full_scale=20.0, count=0.001)
        statement = tolerance.ValueStatement(reading=float(spec), counts=2.0)
        unit, domain, at = "V", "value", float(nominal)
    else:
        law = scales.SeriesOhms(centre=10.0) if kind == "series" else scales.ShuntOhms(centre=10.0)
        ctx = tolerance.RangeContext(law=law, arc=90.0)
        statement = tolerance.DegreesOfArc(degrees=float(spec))
        unit, domain, at = "Ω", "deflection", abs(float(nominal)) + 0.1
    win = tolerance.window(statement, at, ctx)
    term = uncertainty.Term(
        name="u",
        standard_uncertainty=u if domain == "value" else u / 90.0,
        domain=domain,
        distribution="normal",
    )
    bud = uncertainty.budget(terms=[term], nominal=at, law=law, domain=domain)
    return Site(window=win, law=law, unit=unit, budget=bud, rule=decision.rule_from_name(rule))


@settings(max_examples=400, deadline=None)
@given(
    kind=st.sampled_from(["linear", "series", "shunt"]),
    rule=st.sampled_from(RULES),
    nominal=st.decimals(
        min_value=-19, max_value=19, places=3, allow_nan=False, allow_infinity=False
    ),
    spec=st.sampled_from(["0.05", "0.5", "1", "2.5"]),
    u=st.floats(1e-4, 0.5),
    where=st.integers(0, 5),
    nudge=st.sampled_from([-1, 0, 1]),
    places=st.integers(0, 6),
)
def test_printed_numbers_never_contradict_the_verdict(
    kind, rule, nominal, spec, u, where, nudge, places
):
    """For generated points, rules and readings on, just inside and just beyond every boundary,
    the reading shown compared with the limits shown gives the verdict shown, under one prefix."""
    site = _site(kind, str(nominal), spec, u, rule)
    base = evaluate(site, site.window.nominal)
    bounds = [site.window.exact_low, site.window.exact_high]
    bounds += list(base.exact_acceptance or ()) + list(base.outer or ())
    bounds = [b for b in bounds if isinstance(b, Fraction)]
    target = bounds[where % len(bounds)]
    d = Decimal(target.numerator) / Decimal(target.denominator)
    typed = f"{d.quantize(Decimal(1).scaleb(-places)) + nudge * Decimal(1).scaleb(-places):f}"
    if kind != "linear" and Decimal(typed) <= 0:
        return
    result = evaluate(site, float(typed))
    texts = shown(site, result, typed)
    cells = {
        "reading": texts["reading"],
        "low": texts["low"],
        "high": texts["high"],
        "acceptance": (
            f"{texts['accept_low']} to {texts['accept_high']}"
            if texts["accept_low"] is not None
            else "none"
        ),
        "outer": f"{texts['outer_low']} to {texts['outer_high']}" if texts["outer_low"] else "",
    }
    assert _printed_verdict(rule, cells) == result.verdict, (cells, result.verdict)
    assert texts["reading"].split()[0] == typed.lstrip("+") or Decimal(
        texts["reading"].split()[0]
    ) == Decimal(typed)


def test_conditional_results_look_different_on_the_certificate(matrix):
    """Under the non-binary rule each conditional row's verdict cell and chart marker carry a
    class and style of their own (ILAC-G8:09/2019 4.2.3: four distinct statements)."""
    record, soup, _ = matrix["non-binary"]
    for row in record["points"]:
        tr = soup.select_one(f'tr[data-key="{row["key"]}"]')
        assert f"verdict-{row['verdict']}" in tr.select_one("td.verdict")["class"]
    for verdict in ("conditional-pass", "conditional-fail"):
        markers = soup.select(f"svg circle.{verdict}, svg polygon.{verdict}")
        assert markers and all(m.get("fill") == "#ffffff" for m in markers)
    css = soup.select_one("style").get_text()
    assert ".verdict-conditional-pass" in css and ".verdict-conditional-fail" in css
