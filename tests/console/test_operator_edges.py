"""The operator at the edges: enormous lines, silence with the output on, text that looks like
markup."""

from __future__ import annotations

import io
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest
from rich.console import Console as RichConsole
from runkit import build_run, read_until, sim_resources

from verirun.bench.config import load_bench, load_bench_text
from verirun.console import Console, LineReader, QuietConsole
from verirun.errors import RunAborted, UnitError
from verirun.procedure.load import load_procedure_text
from verirun.readings import MAX_ENTRY_LENGTH, OperatorSilent
from verirun.record.documents import validate_document
from verirun.record.journal import read_journal, verify_chain
from verirun.units import MAX_QUANTITY_LENGTH, parse_quantity, split_quantity

EDGE = Path(__file__).resolve().parents[1] / "data" / "edge"
PROCEDURE, BENCH, READINGS = EDGE / "dcv-small.yaml", EDGE / "bench.yaml", EDGE / "readings.csv"
LAB = EDGE / "lab.yaml"
#: Stands for "the operator typed nothing before the time limit" in a Typist's lines.
SILENCE = object()


class Typist:
    """Types the given lines at successive prompts, recording every prompt; ``SILENCE`` makes
    that prompt time out, and a callable is called with the prompt and types what it returns."""

    def __init__(self, lines):
        self.lines = list(lines)
        self.prompts: list[str] = []

    def __call__(self, prompt):
        self.prompts.append(prompt)
        if not self.lines:
            raise AssertionError(f"unexpected prompt {prompt!r}")
        line = self.lines.pop(0)
        if line is SILENCE:
            raise OperatorSilent(300.0)
        return line(prompt) if callable(line) else line


class Bench:
    """A fresh simulated calibrator, with a probe of its own to read the output state."""

    def __init__(self, folder):
        self.used, self.probe = sim_resources(folder, count=2, timeout=200)

    def output(self) -> str:
        return self.probe.query("OUTP?")


def interactive_run(tmp_path, lines, *, procedure=None, bench=None):
    """Run ``procedure`` (the edge one by default) at a console typed by a Typist."""
    sim = Bench(tmp_path)
    out = io.StringIO()
    typist = Typist(lines)
    console = Console(RichConsole(file=out, width=200, highlight=False), input_func=typist)
    error, finished = None, None
    try:
        finished = build_run(
            runs_dir=tmp_path / "runs",
            procedure=procedure or PROCEDURE,
            bench=bench or BENCH,
            readings=None,
            console=console,
            lab=LAB,
            calibrator=sim.used,
        )
    except BaseException as exc:  # noqa: BLE001 - the test looks at what arrived
        error = exc
    run_dir = finished.run_dir if finished else getattr(error, "run_dir", None)
    docs = read_journal(run_dir / "journal.jsonl").documents if run_dir else []
    return error, docs, out.getvalue(), typist, sim


class TestLinearParsing:
    @pytest.mark.parametrize(
        "hostile",
        [
            "1" + " " * 1_000_000 + "x y",  # number, spaces, two words: the shape that backtracked
            " " * 1_000_000,
            "1" + " " * 1_000_000 + "V" + " " * 1_000_000 + "V",
            "9" * 1_000_000 + " V x",
        ],
    )
    def test_a_megabyte_splits_at_once(self, hostile):
        """Splitting a number from its unit takes time in proportion to the text: a million
        characters of the worst shape for a backtracking pattern take well under a second
        (the pattern it replaces took 28 s at forty thousand)."""
        started = time.perf_counter()
        split_quantity(hostile)
        assert time.perf_counter() - started < 1.0

    def test_long_text_is_refused_before_parsing(self):
        """Text longer than any quantity is refused with its length, without being echoed."""
        with pytest.raises(UnitError, match=rf"too long .* at most {MAX_QUANTITY_LENGTH}") as info:
            parse_quantity("1" + " " * 400_000 + "x y", "V")
        assert len(str(info.value)) < 200

    @pytest.mark.parametrize(
        "text, expected",
        [
            ("4.7 kΩ", ("4.7", "kΩ")),
            ("  125mA ", ("125", "mA")),
            ("-.5e-3 V", ("-.5e-3", "V")),
            ("10", ("10", "")),
            ("1 2", None),
            ("1 V x", None),
            ("V", None),
            ("1 .5", None),
            ("", None),
        ],
    )
    def test_split(self, text, expected):
        """A number, then at most one word: its unit (common practice, no source)."""
        assert split_quantity(text) == expected


class TestLongLines:
    def test_a_400_kb_line_is_refused_and_asked_again(self, tmp_path):
        """400 KB of spaces and words at the reading prompt is refused at once as too long, the
        prompt comes again, and only the good reading is journaled."""
        huge = "1" + " " * 400_000 + "x y"
        started = time.perf_counter()
        error, docs, shown, typist, sim = interactive_run(
            tmp_path, ["", huge, "2.05", "5", "9.9", "", "yes", "80"]
        )
        assert error is None, error
        assert time.perf_counter() - started < 10
        assert f"too long: at most {MAX_ENTRY_LENGTH} characters" in shown
        assert [d["typed"] for d in docs if d["kind"] == "observation"] == [
            "2.05",
            "5",
            "9.9",
            "80",
        ]
        assert sim.output() in ("0", "OFF")

    def test_a_long_note_is_refused(self, tmp_path):
        """A note longer than the limit is refused and asked again, not journaled."""
        error, docs, shown, typist, sim = interactive_run(
            tmp_path, ["", "note " + "x" * MAX_ENTRY_LENGTH, "2.05", "5", "9.9", "", "yes", "80"]
        )
        assert error is None, error
        assert not [d for d in docs if d["kind"] == "note" and "xxx" in d["text"]]


class TestLineReader:
    def test_silence_then_a_line(self):
        """No line within the limit raises OperatorSilent; a line typed later answers the next
        get."""
        read, write = os.pipe()
        reader = LineReader(read)
        with pytest.raises(OperatorSilent):
            reader.get(within=0.05)
        os.write(write, "5.0\r\nnote ünïcode\n".encode())
        assert reader.get(within=5) == "5.0"
        assert reader.get(within=5) == "note ünïcode"
        os.close(write)
        for _ in range(2):  # closed input stays closed
            with pytest.raises(EOFError):
                reader.get(within=5)
        os.close(read)

    def test_an_enormous_line_is_cut_as_it_is_read(self):
        """A line of 3 MB is kept only up to one character past the limit; the next line is
        whole."""
        read, write = os.pipe()
        reader = LineReader(read, max_length=1000)
        reader.get  # the thread starts at the first get
        import threading

        feeder = threading.Thread(
            target=lambda: (os.write(write, b" " * 3_000_000 + b"x\n4.9\n"), os.close(write))
        )
        feeder.start()
        assert len(reader.get(within=10)) == 1001
        assert reader.get(within=10) == "4.9"
        feeder.join()
        # The reader has seen the end of the input, so its thread reads no more: closing the
        # descriptor before that would let the thread read whatever file is opened next under
        # the same number (the next test's device file, read as empty).
        with pytest.raises(EOFError):
            reader.get(within=10)
        os.close(read)


class TestSilenceWithTheOutputOn:
    def test_silence_puts_the_output_in_standby_until_the_operator_asks(self, tmp_path):
        """When nothing is typed within the bench's limit the output goes to standby (read back
        off from the device), the operator is told, the standby and the re-application are
        journaled, and the stimulus comes back only after the operator presses Enter."""
        states = []

        def ask_to_apply(prompt):
            states.append((prompt, sim_box[0].output()))
            return ""

        sim_box = []
        lines = ["", SILENCE, ask_to_apply, "2.05", "5", "9.9", "", "yes", "80"]
        # The bench is made here so the probe exists before the typist needs it.
        original_bench = Bench

        class Capturing(original_bench):
            def __init__(self, folder):
                super().__init__(folder)
                sim_box.append(self)

        globals()["Bench"] = Capturing
        try:
            error, docs, shown, typist, sim = interactive_run(tmp_path, lines)
        finally:
            globals()["Bench"] = original_bench
        assert error is None, error
        prompt, state = states[0]
        assert prompt.startswith("Press Enter to apply 2 V DC again") and state in ("0", "OFF")
        assert "nothing was typed for 300 s, so the output was put in standby" in shown
        notes = [d["text"] for d in docs if d["kind"] == "note"]
        assert notes[:2] == [
            "output put in standby: no input from the operator for 300 s",
            "stimulus applied again at the operator's request after the standby",
        ]
        assert [d["typed"] for d in docs if d["kind"] == "observation"] == [
            "2.05",
            "5",
            "9.9",
            "80",
        ]
        assert verify_chain(docs) == []
        for doc in docs:  # the notes are journal documents of the published kind
            if doc["kind"] == "note":
                validate_document(doc)

    def test_at_a_hazardous_level_the_confirmation_is_asked_again(self, tmp_path):
        """After a silence standby at a hazardous point, switching on again needs the hazard
        confirmation again, journaled like the first."""
        error, docs, shown, typist, sim = interactive_run(
            tmp_path, ["", "2.05", "5", "9.9", "", "yes", SILENCE, "", "yes", "80"]
        )
        assert error is None, error
        assert len([d for d in docs if d.get("hazardous")]) == 2
        assert shown.count("DANGER") == 2
        assert sim.output() in ("0", "OFF")

    def test_abort_after_the_standby(self, tmp_path):
        """'abort' at the re-apply prompt stops the run, output off, resumable."""
        error, docs, shown, typist, sim = interactive_run(tmp_path, ["", "2.05", SILENCE, "abort"])
        assert isinstance(error, RunAborted) and "after the output went to standby" in str(error)
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "aborted"
        assert sim.output() in ("0", "OFF")

    def test_a_real_silent_operator(self, tmp_path):
        """A verirun process whose operator types nothing: after the bench's one second the
        output is in standby; Enter applies it again and the run completes."""
        bench = tmp_path / "bench.yaml"
        bench.write_text(BENCH.read_text().replace("safety:\n", "safety:\n  idle-standby: 1 s\n"))
        procedure = tmp_path / "p.yaml"
        procedure.write_text(PROCEDURE.read_text().split("  - id: dcv-100")[0])
        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "verirun",
                "run",
                str(procedure),
                "--bench",
                str(bench),
                "--simulate",
                "--serial",
                "SIL",
                "--customer",
                "C",
                "--condition",
                "as new",
                "--temperature",
                "23",
                "--humidity",
                "45",
                "--runs",
                str(tmp_path / "runs"),
                "--reports",
                str(tmp_path / "reports"),
            ],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
        )
        proc.stdin.write(b"\n")  # the leads are connected
        proc.stdin.flush()
        read_until(proc, b"Press Enter to apply")
        out, err = proc.communicate(b"\n2.05\n5\n9.9\n", timeout=30)
        assert proc.returncode == 0, err.decode()
        journal = next((tmp_path / "runs").glob("*/journal.jsonl"))
        notes = [d["text"] for d in read_journal(journal).documents if d["kind"] == "note"]
        assert "output put in standby: no input from the operator for 1 s" in notes


class TestIdleStandbyInTheBenchFile:
    def test_default_is_five_minutes(self):
        """A bench file without the key puts the output in standby after 300 s of silence."""
        assert load_bench(BENCH).idle_standby_s == 300.0

    @pytest.mark.parametrize(
        "value, message",
        [
            ("0 s", "outside 1 s to 3600 s"),
            ("1e300 s", "outside"),
            ("2 V", "expected seconds"),
        ],
    )
    def test_refused_values(self, value, message):
        """Zero, an enormous time and a wrong unit are refused naming the file, line and field."""
        text = BENCH.read_text().replace("safety:\n", f"safety:\n  idle-standby: {value}\n")
        with pytest.raises(Exception) as info:
            load_bench_text(text, "b.yaml")
        assert any(
            line.startswith("b.yaml:") and "safety.idle-standby" in line and message in line
            for line in info.value.problems
        )


MARKUP_PROCEDURE = PROCEDURE.read_text().replace(
    "connect: Red lead to V, black lead to COM.",
    "connect: '[/] Red lead to [bold]V[/bold], [meter damaged] black to COM.'",
)


class TestTextShownAsWritten:
    def test_markup_in_procedure_and_operator_text_is_shown_literally(self, tmp_path):
        """Brackets in a procedure's connect text, in a refused reading, in a note and in a skip
        reason are shown as written: no crash, nothing swallowed, and the run completes."""
        error, docs, shown, typist, sim = interactive_run(
            tmp_path,
            [
                "",
                "[/]",
                "note [meter damaged]",
                "2.05",
                "skip [/] lead broken [red]",
                "9.9",
                "",
                "yes",
                "80",
            ],
            procedure=load_procedure_text(MARKUP_PROCEDURE, "markup.yaml"),
        )
        assert error is None, error
        assert "Connect: [/] Red lead to [bold]V[/bold], [meter damaged] black to COM." in shown
        assert "'[/]' is not a number with an optional unit" in shown
        assert "skipped: [/] lead broken [red]" in shown
        assert any(d["kind"] == "note" and d["text"] == "[meter damaged]" for d in docs)
        assert sim.output() in ("0", "OFF")

    def test_quiet_console_echo_prints_literally(self):
        """The scripted runs' echo shows warnings and dangers with brackets as written."""
        out = io.StringIO()
        console = QuietConsole(echo=RichConsole(file=out, width=200, highlight=False))
        console.warn("[/] journal [meter damaged]")
        console.danger("[bold]80 V[/]")
        console.heading("Range [/]")
        assert "[/] journal [meter damaged]" in out.getvalue() and "[bold]80 V[/]" in out.getvalue()
        assert "Range [/]" in out.getvalue()

    def test_command_line_summary_and_listing(self, tmp_path, capsys, monkeypatch):
        """A serial and a runs folder that look like markup are printed as written by 'run'
        and 'runs' (exit 0, no internal error)."""
        from verirun.cli import main

        monkeypatch.setenv("COLUMNS", "400")  # table cells on one line each
        runs = tmp_path / "[runs]"
        procedure = tmp_path / "p.yaml"
        procedure.write_text(PROCEDURE.read_text().split("  - id: dcv-100")[0])
        code = main(
            [
                "run",
                str(procedure),
                "--bench",
                str(BENCH),
                "--readings",
                str(EDGE / "readings-dcv10.csv"),
                "--simulate",
                "--serial",
                "[/]SN-1[bold]",
                "--customer",
                "[red]C",
                "--lab",
                str(LAB),
                "--runs",
                str(runs),
                "--reports",
                str(tmp_path / "reports"),
            ]
        )
        assert code == 0, capsys.readouterr().err
        assert f"Run record:  {runs}" in capsys.readouterr().out.replace("\n", "")
        assert main(["runs", "--runs", str(runs)]) == 0
        assert "[/]SN-1[bold]" in capsys.readouterr().out.replace("\n", "")
