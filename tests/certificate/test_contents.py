"""An issued certificate holds what ISO/IEC 17025:2017 7.8.2.1, 7.8.4 and 7.8.6 ask of it.

Each test parses the rendered HTML and checks one item, naming its clause. The certificate is
of a run at the (test) bench, issued by a person the (test) lab profile lists.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from runkit import simulated_run_args

from verirun.cli import main

DATA = Path(__file__).resolve().parents[1] / "data"
#: The demo procedure, as the repository keeps it in procedures/.
PROCEDURE = Path(__file__).resolve().parents[2] / "procedures" / "qm40-analog-multimeter.yaml"


@pytest.fixture(scope="module")
def cert(tmp_path_factory):
    """The issued certificate of the test procedure run at the test bench with scripted
    readings (4 points fail, one skipped)."""
    from pathlib import Path

    from at_the_bench import calibrator_at_the_bench

    data = Path(__file__).resolve().parents[1] / "data"
    tmp = tmp_path_factory.mktemp("contents")
    readings = tmp / "readings.csv"
    readings.write_text(
        (data / "qm40-procedure-readings.csv")
        .read_text()
        .replace("dcv-50,25 V,25\n", "dcv-50,25 V,skip pointer stuck at zero\n")
    )
    with calibrator_at_the_bench():
        assert (
            main(
                [
                    "run",
                    str(data / "qm40-procedure.yaml"),
                    "--bench",
                    str(data / "bench-kestrel.yaml"),
                    "--lab",
                    str(data / "lab-test.yaml"),
                    "--readings",
                    str(readings),
                    "--serial",
                    "QM40-000017",
                    "--asset",
                    "AST-5",
                    "--customer",
                    "Brightwater Pumping Co",
                    "--customer-address",
                    "1 Weir Lane",
                    "--received",
                    "2026-11-28",
                    "--temperature",
                    "23.4",
                    "--humidity",
                    "44",
                    "--condition",
                    "Pointer bent; readable.",
                    "--runs",
                    str(tmp / "runs"),
                    "--reports",
                    str(tmp / "reports"),
                ]
            )
            == 0
        )
    (run,) = (tmp / "runs").iterdir()
    assert (
        main(["issue", str(run), "--by", "A. Thorneycroft", "--reports", str(tmp / "reports")]) == 0
    )
    (path,) = (tmp / "reports").glob("*.html")
    html = path.read_text(encoding="utf-8")
    return BeautifulSoup(html, "html.parser"), html, path


def text_of(soup, selector):
    node = soup.select_one(selector)
    assert node is not None, selector
    return " ".join(node.get_text(" ").split())


class TestClause7821:
    def test_a_title(self, cert):
        """7.8.2.1 a): a title."""
        soup, _, _ = cert
        assert soup.find("h1").get_text(strip=True) == "Certificate of Calibration"

    def test_b_c_lab_name_address_and_place(self, cert):
        """7.8.2.1 b) and c): the lab's name and address, and where the work was done, from the lab
        profile."""
        soup, html, _ = cert
        assert "Kestrel Fen Metrology" in text_of(soup, "header.cert")
        assert "12 Sluice Row" in text_of(soup, "header.cert")
        assert "DC and low-frequency bench" in text_of(soup, "#item")

    def test_d_unique_number_on_every_page_and_end_mark(self, cert):
        """7.8.2.1 d): a unique identification on every page (print footer) and a clear end mark."""
        soup, html, path = cert
        number = text_of(soup, "#certificate-number")
        assert re.fullmatch(r"KFM-\d{8}-[0-9A-F]{8}", number)
        assert path.stem == number
        assert f'content: "Certificate {number}"' in html and "counter(pages)" in html
        assert text_of(soup, ".end-mark") == "END OF CERTIFICATE"

    def test_e_customer(self, cert):
        """7.8.2.1 e): the customer's name and contact information."""
        soup, _, _ = cert
        assert "Brightwater Pumping Co" in text_of(soup, "#item") and "1 Weir Lane" in text_of(
            soup, "#item"
        )

    def test_f_method_and_n_deviations(self, cert):
        """7.8.2.1 f) and n): the method (procedure and revision) and deviations from it, a skipped
        point with its reason."""
        soup, _, _ = cert
        assert "TH-VP-040 revision B" in text_of(soup, "#method")
        deviations = text_of(soup, "#deviations")
        assert (
            "skipped" in deviations
            and "pointer stuck at zero" in deviations
            and "25 V DC" in deviations
        )

    def test_g_item_description_identification_condition(self, cert):
        """7.8.2.1 g): description, unambiguous identification and condition of the item."""
        soup, _, _ = cert
        item = text_of(soup, "#item")
        assert "analog multimeter" in item and "Quillmark Instruments QM-40" in item
        assert "QM40-000017" in item and "AST-5" in item and "Pointer bent; readable." in item

    def test_h_i_j_dates(self, cert):
        """7.8.2.1 h), i), j): dates of receipt, of calibration and of issue."""
        soup, _, _ = cert
        assert text_of(soup, "#date-received") == "2026-11-28"
        calibrated = text_of(soup, "#date-calibrated")
        assert re.fullmatch(r"\d{4}-\d{2}-\d{2}", calibrated)
        assert "Date of issue" in text_of(soup, "#authorisation")
        assert text_of(soup, "#date-issued") >= calibrated

    def test_l_results_relate_only_to_the_item(self, cert):
        """7.8.2.1 l): the statement that the results relate only to the item calibrated."""
        soup, _, _ = cert
        assert "relate only to the item calibrated" in text_of(soup, "#relate-only")

    def test_m_results_with_units(self, cert):
        """7.8.2.1 m): results with their units, per range, as a table."""
        soup, _, _ = cert
        tables = soup.select("table.results")
        assert len(tables) == 6
        first = tables[0].select("tbody tr")[0].get_text(" ")
        assert " V" in first and "PASS" in first
        ohms = soup.select_one('table[data-range="ohm-x100"]').get_text(" ")
        assert "kΩ" in ohms and "°" in ohms

    def test_o_authorised_by(self, cert):
        """7.8.2.1 o): who authorised the certificate, in the role the lab profile gives them."""
        soup, _, _ = cert
        assert text_of(soup, "#issued-by") == "A. Thorneycroft, Quality Manager"


class TestClause784And786:
    def test_uncertainty_with_coverage_factor_and_probability(self, cert):
        """7.8.4.1 a) with 7.8.3.1 c): each result's expanded uncertainty, with its coverage factor
        and coverage probability stated."""
        soup, _, _ = cert
        assert "U (k = 2)" in text_of(soup, "table.results thead")
        statement = text_of(soup, "#uncertainty-statement")
        assert "k = 2" in statement and "95 %" in statement

    def test_environmental_conditions(self, cert):
        """7.8.4.1 b): the conditions under which the calibration was made."""
        soup, _, _ = cert
        env = text_of(soup, "#environment")
        assert "23.4 °C" in env and "44 % relative humidity" in env

    def test_traceability_and_standards(self, cert):
        """7.8.4.1 c) and 6.5: the standards used, their certificates and due dates, and how the
        results are metrologically traceable."""
        soup, _, _ = cert
        method = text_of(soup, "#method")
        assert "TH-STD-011" in method and "TH-CC-2026-0117" in method and "due 2099-12-31" in method
        assert "traceable to national measurement standards" in method

    def test_statement_of_conformity_and_decision_rule(self, cert):
        """7.8.6.2: the statement of conformity says which results it covers and the decision
        rule."""
        soup, _, _ = cert
        assert "Simple acceptance (ILAC-G8:09/2019 4.2.1" in text_of(soup, "#decision-rule")
        overall = text_of(soup, "#overall")
        assert (
            "does NOT conform" in overall and "4 of 20 points" in overall and "1 skipped" in overall
        )

    def test_as_found_and_as_left(self, cert, tmp_path):
        """7.8.4.1 d): where the item was adjusted, results as found and as left are both given."""
        data = DATA / "qm40-readings.csv"
        assert main(simulated_run_args(tmp_path, PROCEDURE, serial="QM40-5", reports="rep")) == 0
        (found_run,) = (tmp_path / "runs").iterdir()
        left = tmp_path / "left.csv"
        left.write_text(data.read_text().replace("dcv-6,4.8 V,4.6", "dcv-6,4.8 V,4.8"))
        as_left = simulated_run_args(
            tmp_path, PROCEDURE, readings=left, serial="QM40-5", reports="rep"
        )
        as_left += ["--as-left-of", str(found_run), "--adjustment", "span trimmer reset"]
        assert main(as_left) == 0
        (left_run,) = [run for run in (tmp_path / "runs").iterdir() if run != found_run]
        from verirun.certificate.render import certificate_path
        from verirun.record.journal import load_record

        soup = BeautifulSoup(
            certificate_path(load_record(left_run), tmp_path / "rep").read_text(), "html.parser"
        )
        # One table per range, each point's as-found and as-left results in one row.
        tables = soup.select('table[data-pass="as-found-and-as-left"]')
        assert len(tables) == 6 and not soup.select('table[data-pass="as-found"]')
        assert "span trimmer reset" in text_of(soup, "#adjustment")
        row = soup.select_one('table[data-range="dcv-6"] tr[data-key="dcv-6@4.8V"]')
        assert row.select_one('td[data-verdict="as-found"]').get_text() == "FAIL"
        assert row.select_one('td[data-verdict="as-left"]').get_text() == "PASS"
        assert row.select_one('td[data-pass="as-found"]').get_text().startswith("4.6")
        assert row.select_one('td[data-pass="as-left"]').get_text().startswith("4.8")
        # The statement of conformity covers both: what was found, and what was left.
        found, left = text_of(soup, "#overall").split("As left, after the adjustment:")
        assert "As found, before the adjustment: Statement of conformity" in found
        assert "does NOT conform" in found and "4 of 20 points are not accepted" in found
        assert "3 of 20 points are not accepted" in left

    def test_as_left_of_another_item_is_refused(self, tmp_path, capsys):
        """An as-left run must follow an as-found run of the same item."""
        assert main(simulated_run_args(tmp_path, PROCEDURE, serial="ONE", reports="rep")) == 0
        (found_run,) = (tmp_path / "runs").iterdir()
        as_left = simulated_run_args(tmp_path, PROCEDURE, serial="TWO", reports="rep")
        assert main([*as_left, "--as-left-of", str(found_run), "--adjustment", "x"]) == 1
        assert "not 'TWO'" in capsys.readouterr().err

    def test_as_left_for_another_customer_or_a_second_as_left_is_refused(self, tmp_path, capsys):
        """An as-left run is of the same item for the same customer, and one follows each
        as-found run; a refused run writes no run folder."""

        def run(customer: str, *more: str) -> int:
            return main(
                [
                    *simulated_run_args(
                        tmp_path, PROCEDURE, serial="S1", customer=customer, reports="rep"
                    ),
                    *more,
                ]
            )

        assert run("C") == 0
        (found_run,) = (tmp_path / "runs").iterdir()
        left = ["--as-left-of", str(found_run), "--adjustment", "zero set"]
        assert run("D", *left) == 1
        assert "for customer 'C', not 'D'" in capsys.readouterr().err
        assert len(list((tmp_path / "runs").iterdir())) == 1
        assert run("C", *left) == 0
        assert run("C", *left) == 1
        assert "has an as-left run already" in capsys.readouterr().err
        assert len(list((tmp_path / "runs").iterdir())) == 2
