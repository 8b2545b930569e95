"""The main job end to end: the demo procedure on the simulated calibrator, to a certificate.

The calibrator is the pyvisa-sim device driven by the real driver; readings come from a CSV
file; the certificate is then rendered again from the stored record and compared byte for byte.
"""

from __future__ import annotations

import json

import pytest
from runkit import demo_run, sim_resources

from verirun.certificate.render import write_certificate
from verirun.cli import main
from verirun.record.journal import load_record, read_journal

# Expected verdicts of the scripted readings (tests/data/qm40-readings.csv), each worked by hand:
# linear ranges: limits = nominal ± percent × full scale / 100 (percent of full scale, and a
# class index on a linear scale whose zero is at one end: IEC 60051-1, from memory, takes the
# full-scale value as its fiducial value); limits included under simple acceptance,
# ILAC-G8:09/2019 4.2.1;
# series ohms: deflection θ = arc × Rc/(Rc+Rx), window θ0 ± 3°, limits Rx = Rc (arc - θ)/θ
# (derived from f = Rc/(Rc+Rx)); here arc = 90° and Rc = 16 Ω (×1) or 16 kΩ (×1k).
EXPECTED = {
    "dcv-6@1.2V": "pass",  # 1.25 in 1.05..1.35 (class 2.5 of 6 V = 0.15 V)
    "dcv-6@2.4V": "pass",
    "dcv-6@3.6V": "pass",  # 3.75 exactly on the upper limit 3.6 + 0.15: included
    "dcv-6@4.8V": "fail",  # 4.6 below 4.8 - 0.15 = 4.65
    "dcv-6@6V": "pass",  # 6.1 in 5.85..6.15
    "dcv-30@6V": "pass",  # 6.5 in 5.25..6.75 (class 2.5 of 30 V = 0.75 V)
    "dcv-30@15V": "pass",
    "dcv-30@30V": "pass",  # 30.75 exactly on the upper limit: included
    "dca-30m@6mA": "pass",  # 6.5 mA in 5.1..6.9 mA (3 % of 30 mA = 0.9 mA)
    "dca-30m@15mA": "pass",  # 15.8 mA (typed in amperes, 0.0158) below 15.9 mA
    "dca-30m@30mA": "fail",  # 29 mA below 29.1 mA
    "acv-30@6V@50Hz": "pass",  # 6 in 4.8..7.2 (4 % of 30 V = 1.2 V)
    "acv-30@15V@50Hz": "pass",  # 15.5 in 13.8..16.2
    "acv-30@30V@50Hz": "pass",
    "ohm-x1@4ohm": "pass",  # θ0 = 90 × 16/20 = 72°; 69°..75° -> 4.8696 .. 3.2 Ω; 4.5 in
    "ohm-x1@16ohm": "pass",  # θ0 = 45°; 42°..48° -> 18.286 .. 14 Ω; 15 in
    "ohm-x1@64ohm": "fail",  # θ0 = 90 × 16/80 = 18°; 15°..21° -> 80 .. 52.571 Ω; 85 above 80
    "ohm-x1k@4kohm": "pass",  # 3.2 .. 4.8696 kΩ; 4 kΩ in
    "ohm-x1k@16kohm": "fail",  # 14 .. 18.286 kΩ; 18.5 kΩ above
    "ohm-x1k@500kohm": "pass",  # θ0 = 90 × 16/516 = 2.7907° < 3°: unbounded above; 1 MΩ in
}


class Recorder:
    """A VISA resource wrapper that records every command the driver sends."""

    def __init__(self, resource):
        self.resource = resource
        self.sent: list[str] = []

    def write(self, command):
        self.sent.append(command)
        return self.resource.write(command)

    def query(self, command):
        self.sent.append(command)
        return self.resource.query(command)

    def close(self):
        self.resource.close()

    @property
    def timeout(self):
        return self.resource.timeout


@pytest.fixture
def sim(tmp_path):
    """A fresh simulated calibrator (its own copy of the device file) and a raw handle to it."""
    (raw,) = sim_resources(tmp_path)
    yield raw


def run_demo(make_run, sim):
    recorder = Recorder(sim)
    return make_run(**demo_run(), calibrator=recorder), recorder


class TestDemoEndToEnd:
    def test_verdicts_commands_output_off_and_certificate(
        self, tmp_path, sim, make_run, demo_procedure_path
    ):
        """The demo run gives the hand-worked verdicts, drives the calibrator point by point,
        leaves its output off, and `certify` reproduces the certificate byte for byte."""
        finished, recorder = run_demo(make_run, sim)
        record = finished.record
        verdicts = {row.key: row.verdict for row in record.points}
        assert verdicts == EXPECTED
        assert record.summary.overall == "fail"
        assert record.summary.failed == 4 and record.summary.passed == 16
        assert record.run.status == "complete"

        # The calibrator was identified, then each point sourced and switched on, then standby.
        sent = recorder.sent
        assert sent[0] == "*IDN?"
        sources = [c for c in sent if c.split()[0] in ("VOLT", "CURR", "RES")]
        # Values go out in full precision (Python's shortest round-trip repr of the float).
        assert sources == [
            "VOLT 1.2",
            "VOLT 2.4",
            "VOLT 3.6",
            "VOLT 4.8",
            "VOLT 6.0",
            "VOLT 6.0",
            "VOLT 15.0",
            "VOLT 30.0",
            "CURR 0.006",
            "CURR 0.015",
            "CURR 0.03",
            "VOLT 6.0",
            "VOLT 15.0",
            "VOLT 30.0",
            "RES 4.0",
            "RES 16.0",
            "RES 64.0",
            "RES 4000.0",
            "RES 16000.0",
            "RES 500000.0",
        ]
        assert sent.count("FREQ 50.0") == 3
        assert sent.count("OUTP ON") == 20
        # Between any two "output on" commands there is a standby.
        on_positions = [i for i, c in enumerate(sent) if c == "OUTP ON"]
        for a, b in zip(on_positions, on_positions[1:]):
            assert "OUTP OFF" in sent[a:b]
        assert sent[on_positions[-1] :].count("OUTP OFF") >= 1
        # Read back from the device itself, not from the driver: the output is off.
        assert sim.query("OUTP?").strip() in ("0", "OFF")
        # Every observation was journaled, each in order, chained.
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        observations = [d for d in docs if d["kind"] == "observation"]
        assert len(observations) == 20
        assert docs[0]["kind"] == "start" and docs[-1]["kind"] == "stop"

        # Regenerate from the stored record: identical bytes.
        first = finished.certificate.read_bytes()
        assert main(["certify", str(finished.run_dir), "--reports", str(tmp_path / "again")]) == 0
        again = (tmp_path / "again" / finished.certificate.name).read_bytes()
        assert again == first
        assert (
            write_certificate(load_record(finished.record_path), tmp_path / "third").read_bytes()
            == first
        )

    def test_record_holds_what_the_run_used(self, tmp_path, sim, make_run, demo_procedure_path):
        """The run record embeds the procedure text and hash, the bench identity and every
        window."""
        import hashlib

        finished, _ = run_demo(make_run, sim)
        record = json.loads(finished.record_path.read_text())
        text = demo_procedure_path.read_text(encoding="utf-8")
        assert record["procedure"]["text"] == text
        assert record["procedure"]["sha256"] == hashlib.sha256(text.encode()).hexdigest()
        assert record["bench"]["calibrator"]["identity"].startswith("Verirun Simulation")
        assert record["run"]["software"]["name"] == "verirun"
        row = next(r for r in record["points"] if r["key"] == "ohm-x1k@16kohm")
        # 3 degrees of a 90 degree arc at centre scale (f0 = 0.5, df = 3/90 = 1/30):
        # 16 kΩ × (1 - f)/f at f = 0.5 ± 1/30, i.e. 16 kΩ × 14/16 .. 16 kΩ × 16/14
        assert row["low"] == pytest.approx(16000 * 14 / 16)
        assert row["high"] == pytest.approx(16000 * 16 / 14)
        assert row["error_unit"] == "deg"
        # reading 18.5 kΩ: θ = 90 × 16/34.5 = 41.739°; error = θ - 45° = -3.261°
        assert row["error"] == pytest.approx(90 * 16 / 34.5 - 45)
        far = next(r for r in record["points"] if r["key"] == "ohm-x1k@500kohm")
        # θ0 = 90 × 16/516 = 2.7907°: the 3° tolerance reaches the open end, so no upper limit;
        # the lower limit is at θ0 + 3° = 5.7907°: 16 kΩ × (90 - 5.7907)/5.7907 = 232.67 kΩ
        assert far["high"] is None  # an unbounded limit is stored as null
        assert far["low"] == pytest.approx(16000 * (90 - (1440 / 516 + 3)) / (1440 / 516 + 3))
        assert far["verdict"] == "pass"


class TestDemoCommand:
    def test_demo_writes_a_failing_certificate(self, tmp_path, capsys):
        """`verirun demo` runs on the simulated bench and writes a certificate with a failing
        point."""
        code = main(
            ["demo", "--runs", str(tmp_path / "runs"), "--reports", str(tmp_path / "reports")]
        )
        assert code == 0
        certs = list((tmp_path / "reports").glob("*.html"))
        assert len(certs) == 1
        html = certs[0].read_text(encoding="utf-8")
        assert "verdict-fail" in html and "does NOT conform" in html
        records = list((tmp_path / "runs").glob("*/record.json"))
        record = json.loads(records[0].read_text())
        assert record["summary"]["fail"] >= 1
        # ...and an ohms point whose window is open above (its upper limit stored as null).
        assert any(row["high"] is None and row["unit"] == "Ω" for row in record["points"])
