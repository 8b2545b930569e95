"""The main job end to end: the demo procedure on the simulated calibrator, to a certificate.

The calibrator is the pyvisa-sim device driven by the real driver; readings come from a CSV
file; the certificate is then rendered again from the stored record and compared byte for byte.
"""

from __future__ import annotations

import datetime as dt
import json

import pytest

from verirun.bench.calibrator import Calibrator
from verirun.bench.config import load_bench
from verirun.bench.sim import SIM_RESOURCE, sim_library
from verirun.certificate.render import write_certificate
from verirun.cli import main
from verirun.clock import VirtualClock
from verirun.console import QuietConsole
from verirun.engine import RunContext
from verirun.lab import load_lab
from verirun.procedure.load import load_procedure
from verirun.readings import ScriptedReadings
from verirun.record import load_record, read_journal
from verirun.session import execute

# Expected verdicts of the scripted readings (tests/data/qm40-readings.csv), each worked by hand:
# linear ranges: limits = nominal ± percent × full scale / 100 (percent of full scale, limits
# included under simple acceptance, ILAC-G8:09/2019 4.2.1);
# series ohms: f0 = Rc/(Rc+Rx), f = f0 ± deg/arc, limits Rx = Rc(1 - f)/f (derived from
# f = Rc/(Rc+Rx)).
EXPECTED = {
    "dcv-10@2.0": "pass",      # 2.1 in 1.8..2.2
    "dcv-10@4.0": "pass",
    "dcv-10@6.0": "pass",      # 6.2 exactly on the upper limit 6.2: included
    "dcv-10@8.0": "fail",      # 8.25 above 8.2
    "dcv-10@10.0": "pass",
    "dcv-50@10.0": "pass",     # 10.5 in 9..11 (2 % of 50 V = 1 V)
    "dcv-50@25.0": "pass",
    "dcv-50@50.0": "pass",     # 50.75 in 49..51
    "dca-50m@0.01": "pass",    # 10.5 mA in 8.75..11.25 mA (2.5 % of 50 mA = 1.25 mA)
    "dca-50m@0.025": "pass",   # 26.2 mA below 26.25 mA
    "dca-50m@0.05": "fail",    # 48.5 mA below 48.75 mA
    "acv-50@10.0@50.0Hz": "pass",
    "acv-50@30.0@50.0Hz": "pass",
    "acv-50@50.0@50.0Hz": "pass",
    "ohm-x1@3.0": "pass",      # f0 = 12/15 = 0.8; 0.8 ± 0.025 -> 2.5455 .. 3.4839 ohm
    "ohm-x1@12.0": "pass",     # f0 = 0.5; 0.475..0.525 -> 10.857 .. 13.263 ohm
    "ohm-x1@48.0": "fail",     # f0 = 0.2; 0.175..0.225 -> 41.333 .. 56.571 ohm; 60 outside
    "ohm-x100@300.0": "pass",
    "ohm-x100@1200.0": "fail",  # 1085.7 .. 1326.3 ohm; 1060 outside
    "ohm-x100@4800.0": "pass",  # 4133.3 .. 5657.1 ohm
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
    import pyvisa

    rm = pyvisa.ResourceManager(sim_library(tmp_path / "sim"))
    raw = rm.open_resource(SIM_RESOURCE, read_termination="\n", write_termination="\n", timeout=300)
    yield raw


def run_demo(tmp_path, sim, demo_procedure_path, demo_bench_path, demo_lab_path, data_dir):
    recorder = Recorder(sim)
    calibrator = Calibrator(recorder, "scpi-generic")
    lab = load_lab(demo_lab_path)
    context = RunContext(lab=lab.lab.model_dump(mode="json"), customer={"name": "Test customer", "address": []},
                         item={"serial": "SN-1", "asset": None, "condition": "as new"},
                         operator="tester", simulated=True)
    finished = execute(procedure=load_procedure(demo_procedure_path), bench=load_bench(demo_bench_path),
                       context=context, readings=ScriptedReadings(data_dir / "qm40-readings.csv"),
                       console=QuietConsole(), runs_dir=tmp_path / "runs", reports_dir=tmp_path / "reports",
                       simulate=True, clock=VirtualClock(dt.datetime(2026, 12, 1, 9, 0, tzinfo=dt.timezone.utc)),
                       uid="0123456789abcdef0123456789abcdef", calibrator=calibrator)
    return finished, recorder


class TestDemoEndToEnd:
    def test_verdicts_commands_output_off_and_certificate(self, tmp_path, sim, demo_procedure_path,
                                                          demo_bench_path, demo_lab_path, data_dir):
        """The demo run gives the hand-worked verdicts, drives the calibrator point by point,
        leaves its output off, and `certify` reproduces the certificate byte for byte."""
        finished, recorder = run_demo(tmp_path, sim, demo_procedure_path, demo_bench_path, demo_lab_path,
                                      data_dir)
        record = finished.record
        verdicts = {row["key"]: row["verdict"] for row in record["points"]}
        assert verdicts == EXPECTED
        assert record["summary"]["overall"] == "fail"
        assert record["summary"]["fail"] == 4 and record["summary"]["pass"] == 16
        assert record["run"]["status"] == "complete"

        # The calibrator was identified, then each point sourced and switched on, then standby.
        sent = recorder.sent
        assert sent[0] == "*IDN?"
        sources = [c for c in sent if c.split()[0] in ("VOLT", "CURR", "RES")]
        # Values go out in full precision (Python's shortest round-trip repr of the float).
        assert sources == ["VOLT 2.0", "VOLT 4.0", "VOLT 6.0", "VOLT 8.0", "VOLT 10.0", "VOLT 10.0",
                           "VOLT 25.0", "VOLT 50.0", "CURR 0.01", "CURR 0.025", "CURR 0.05", "VOLT 10.0",
                           "VOLT 30.0", "VOLT 50.0", "RES 3.0", "RES 12.0", "RES 48.0", "RES 300.0",
                           "RES 1200.0", "RES 4800.0"]
        assert sent.count("FREQ 50.0") == 3
        assert sent.count("OUTP ON") == 20
        # Between any two "output on" commands there is a standby.
        on_positions = [i for i, c in enumerate(sent) if c == "OUTP ON"]
        for a, b in zip(on_positions, on_positions[1:]):
            assert "OUTP OFF" in sent[a:b]
        assert sent[on_positions[-1]:].count("OUTP OFF") >= 1
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
        assert write_certificate(load_record(finished.record_path), tmp_path / "third").read_bytes() == first

    def test_record_holds_what_the_run_used(self, tmp_path, sim, demo_procedure_path, demo_bench_path,
                                            demo_lab_path, data_dir):
        """The run record embeds the procedure text and hash, the bench identity and every window."""
        import hashlib

        finished, _ = run_demo(tmp_path, sim, demo_procedure_path, demo_bench_path, demo_lab_path, data_dir)
        record = json.loads(finished.record_path.read_text())
        text = demo_procedure_path.read_text(encoding="utf-8")
        assert record["procedure"]["text"] == text
        assert record["procedure"]["sha256"] == hashlib.sha256(text.encode()).hexdigest()
        assert record["bench"]["calibrator"]["identity"].startswith("Verirun Simulation")
        assert record["run"]["software"]["name"] == "verirun"
        row = next(r for r in record["points"] if r["key"] == "ohm-x100@1200.0")
        # 2.5 degrees of a 100 degree arc at centre scale: 1200 * 0.475/0.525 .. 1200 * 0.525/0.475
        assert row["low"] == pytest.approx(1200 * 0.475 / 0.525)
        assert row["high"] == pytest.approx(1200 * 0.525 / 0.475)
        assert row["error_unit"] == "deg"
        # reading 1060 ohm: f = 1200/2260 = 0.530973; error = (0.530973 - 0.5) * 100 deg
        assert row["error"] == pytest.approx((1200 / 2260 - 0.5) * 100)


class TestDemoCommand:
    def test_demo_writes_a_failing_certificate(self, tmp_path, capsys):
        """`verirun demo` runs on the simulated bench and writes a certificate with a failing point."""
        code = main(["demo", "--runs", str(tmp_path / "runs"), "--reports", str(tmp_path / "reports")])
        assert code == 0
        certs = list((tmp_path / "reports").glob("*.html"))
        assert len(certs) == 1
        html = certs[0].read_text(encoding="utf-8")
        assert "verdict-fail" in html and "does NOT conform" in html
        records = list((tmp_path / "runs").glob("*/record.json"))
        assert json.loads(records[0].read_text())["summary"]["fail"] >= 1
