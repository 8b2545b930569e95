"""The operator at the console: re-prompts, commands, hazardous-voltage confirmation."""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from rich.console import Console as RichConsole
from runkit import build_run, sim_resources

from verirun.bench.config import load_bench_text
from verirun.console import Console
from verirun.errors import RunAborted
from verirun.procedure.load import load_procedure_text
from verirun.record.journal import read_journal

DATA = Path(__file__).resolve().parents[1] / "data"

PROCEDURE = (DATA / "operator-procedure.yaml").read_text(encoding="utf-8")

HAZARD = (DATA / "hazard-procedure.yaml").read_text(encoding="utf-8")


class Typist:
    """Types the given lines at successive prompts, recording every prompt.

    With ``then_close``, the input closes (end of file) once the lines are used up.
    """

    def __init__(self, lines, then_close=False):
        self.lines = list(lines)
        self.prompts = []
        self.then_close = then_close

    def __call__(self, prompt):
        self.prompts.append(prompt)
        if not self.lines:
            if self.then_close:
                raise EOFError
            raise AssertionError(f"unexpected prompt {prompt!r}")
        return self.lines.pop(0)


def typed_run(
    tmp_path,
    procedure_text,
    lines,
    demo_bench_path,
    demo_lab_path,
    bench_text=None,
    then_close=False,
):
    """A run of ``procedure_text`` to start with ``go()``, its readings typed as ``lines``."""
    (raw,) = sim_resources(tmp_path)
    out = io.StringIO()
    typist = Typist(lines, then_close=then_close)
    console = Console(RichConsole(file=out, width=120, highlight=False), input_func=typist)
    bench = load_bench_text(bench_text, "bench.yaml") if bench_text else demo_bench_path

    def go():
        return build_run(
            runs_dir=tmp_path / "runs",
            procedure=load_procedure_text(procedure_text, "proc.yaml"),
            bench=bench,
            readings=None,
            console=console,
            lab=demo_lab_path,
            calibrator=raw,
        )

    return go, raw, out, typist


class TestReadingPrompt:
    def test_bad_input_re_prompts_with_the_reason_and_journals_nothing(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """Non-numeric text, a wrong unit, a decimal comma, empty input and a value beyond the
        scale are each refused with the reason and asked again; only the good reading is
        journaled."""
        lines = ["", "abc", "5 mA", "4,9", "12.5", "4.9", "10.1 V"]
        go, raw, out, typist = typed_run(
            tmp_path, PROCEDURE, ["", *lines], demo_bench_path, demo_lab_path
        )
        finished = go()
        text = out.getvalue()
        for reason in (
            "empty",
            "not a number",
            "expected volts",
            "decimal point",
            "beyond the ends",
        ):
            assert reason in text
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        assert [d["typed"] for d in docs if d["kind"] == "observation"] == ["4.9", "10.1 V"]
        assert raw.query("OUTP?") in ("0", "OFF")

    def test_console_shows_step_range_stimulus_and_connection(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """Each step shows 'Step n of N', the range, the stimulus and, before the range, what to
        connect."""
        go, raw, out, typist = typed_run(
            tmp_path, PROCEDURE, ["", "5", "10"], demo_bench_path, demo_lab_path
        )
        go()
        text = out.getvalue()
        assert "Step 1 of 2" in text and "Step 2 of 2" in text and "applied 5 V DC" in text
        assert "Red to V, black to COM." in text and "standby" in text

    def test_repeat_skip_and_note(self, tmp_path, demo_bench_path, demo_lab_path):
        """'repeat' applies the stimulus again, 'note' journals a note, 'skip' journals the reason,
        which the certificate then shows."""
        go, raw, out, typist = typed_run(
            tmp_path,
            PROCEDURE,
            ["", "repeat", "note pointer sticky", "5.0", "skip lead broken"],
            demo_bench_path,
            demo_lab_path,
        )
        finished = go()
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        kinds = [d["kind"] for d in docs]
        assert kinds.count("observation") == 1 and kinds.count("skip") == 1
        assert any(d["kind"] == "note" and d["text"] == "pointer sticky" for d in docs)
        assert any(d["kind"] == "skip" and d["reason"] == "lead broken" for d in docs)
        record = finished.record
        assert record.points[1].verdict == "skipped"
        html = finished.certificate.read_text()
        assert "lead broken" in html and "pointer sticky" in html

    def test_abort_leaves_output_off_and_the_run_resumable(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """'abort' stops the run with the output read back off, the confirmed reading journaled,
        and a stop document saying the run was aborted."""
        go, raw, out, typist = typed_run(
            tmp_path, PROCEDURE, ["", "5.0", "abort"], demo_bench_path, demo_lab_path
        )
        with pytest.raises(RunAborted) as info:
            go()
        assert raw.query("OUTP?") in ("0", "OFF")
        run_dir = info.value.run_dir
        docs = read_journal(run_dir / "journal.jsonl").documents
        assert [d["kind"] for d in docs].count("observation") == 1
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "aborted"
        assert json.loads((run_dir / "record.json").read_text())["run"]["status"] == "aborted"


class TestHazardousVoltage:
    def test_operator_must_confirm_before_hazardous_output(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """At or above 60 V DC (IEC 61010-1 6.3.1) the output goes on only after the operator types
        'yes'; the confirmation is journaled."""
        go, raw, out, typist = typed_run(
            tmp_path, HAZARD, ["", "20", "yes", "80"], demo_bench_path, demo_lab_path
        )
        finished = go()
        assert "DANGER" in out.getvalue()
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        assert any(d.get("hazardous") and "confirmed by the operator" in d["text"] for d in docs)

    def test_refusing_the_confirmation_stops_with_output_off(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """Anything but yes, y or skip stops the run before the hazardous output goes on."""
        go, raw, out, typist = typed_run(
            tmp_path, HAZARD, ["", "20", "n"], demo_bench_path, demo_lab_path
        )
        with pytest.raises(RunAborted, match="not confirmed"):
            go()
        assert raw.query("OUTP?") in ("0", "OFF")
        assert raw.query("VOLT?") != "80.0"  # the hazardous value was never set

    def test_scripted_run_needs_the_bench_permission(
        self, tmp_path, demo_bench_path, demo_lab_path, data_dir
    ):
        """A scripted run refuses hazardous output unless the bench file permits it."""

        readings_csv = tmp_path / "r.csv"
        readings_csv.write_text("range,at,reading\ndcv-100,20 V,20\ndcv-100,80 V,80\n")
        bench_text = demo_bench_path.read_text().replace(
            "scripted-hazardous: allow", "scripted-hazardous: refuse"
        )
        (raw,) = sim_resources(tmp_path)
        with pytest.raises(RunAborted, match="does not permit"):
            build_run(
                runs_dir=tmp_path / "runs",
                reports_dir=tmp_path / "rep",
                procedure=load_procedure_text(HAZARD, "p.yaml"),
                bench=load_bench_text(bench_text, "b.yaml"),
                readings=readings_csv,
                lab=demo_lab_path,
                calibrator=raw,
            )
        assert raw.query("OUTP?") in ("0", "OFF")


class TestHazardOnRepeat:
    def test_repeat_at_a_hazardous_point_asks_again(self, tmp_path, demo_bench_path, demo_lab_path):
        """'repeat' at a hazardous point puts the output in standby, so switching it on again
        needs a second confirmation, journaled like the first."""
        go, raw, out, typist = typed_run(
            tmp_path,
            HAZARD,
            ["", "20", "yes", "repeat", "yes", "80"],
            demo_bench_path,
            demo_lab_path,
        )
        finished = go()
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        confirmations = [d for d in docs if d.get("hazardous")]
        assert len(confirmations) == 2
        assert out.getvalue().count("DANGER") == 2

    def test_refusing_the_second_confirmation_stops(self, tmp_path, demo_bench_path, demo_lab_path):
        """Refusing the confirmation after a repeat stops the run with the output off."""
        go, raw, out, typist = typed_run(
            tmp_path, HAZARD, ["", "20", "yes", "repeat", "no"], demo_bench_path, demo_lab_path
        )
        with pytest.raises(RunAborted, match="not confirmed"):
            go()
        assert raw.query("OUTP?") in ("0", "OFF")


class TestClosedInput:
    def test_end_of_input_stops_resumable_with_output_off(
        self, tmp_path, demo_bench_path, demo_lab_path
    ):
        """If the console input closes (end of file) the run stops as an abort: output off,
        readings kept, resumable; not an internal error."""
        go, raw, out, typist = typed_run(
            tmp_path, PROCEDURE, ["", "5.0"], demo_bench_path, demo_lab_path, then_close=True
        )
        with pytest.raises(RunAborted, match="input was closed") as info:
            go()
        assert raw.query("OUTP?") in ("0", "OFF")
        docs = read_journal(info.value.run_dir / "journal.jsonl").documents
        assert [d["kind"] for d in docs].count("observation") == 1 and docs[-1][
            "status"
        ] == "aborted"

    def test_cli_with_closed_input_exits_2_not_70(
        self, tmp_path, demo_procedure_path, demo_bench_path
    ):
        """`verirun run` at the console with stdin closed exits 2 with the resume hint, after
        checking its files, and never reports an internal error."""
        import subprocess
        import sys

        cmd = [
            sys.executable,
            "-m",
            "verirun",
            "run",
            str(demo_procedure_path),
            "--bench",
            str(demo_bench_path),
            "--simulate",
            "--serial",
            "EOF",
            "--customer",
            "C",
            "--temperature",
            "23",
            "--humidity",
            "40",
            "--condition",
            "as new",
            "--runs",
            str(tmp_path / "runs"),
            "--reports",
            str(tmp_path / "rep"),
        ]
        result = subprocess.run(
            cmd, stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=60
        )
        assert result.returncode == 2, result.stderr
        assert "internal error" not in result.stderr and "input was closed" in result.stderr
        assert "verirun resume" in result.stderr
        missing = [
            sys.executable,
            "-m",
            "verirun",
            "run",
            str(tmp_path / "nope.yaml"),
            "--bench",
            str(demo_bench_path),
            "--serial",
            "S",
            "--customer",
            "C",
        ]
        result = subprocess.run(
            missing, stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=60
        )
        assert (
            result.returncode == 1
            and "no such file" in result.stderr
            and "temperature" not in result.stdout
        )
