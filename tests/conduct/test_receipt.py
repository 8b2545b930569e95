"""Nothing silent at the start of a run: the lab, the item's receipt and its condition.

ISO/IEC 17025:2017 7.8.2.1 i) (the date of receipt), 7.4.3 (the condition of the item on
receipt, recorded) and 7.8.2.1 b) (the laboratory's own name): a run at a real bench records
them as given or asked, never a default of verirun's.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest

from verirun.cli import main
from verirun.errors import UnitError
from verirun.receipt import ask_condition, check_received

DATA = Path(__file__).resolve().parents[1] / "data"


def run_args(tmp: Path, *extra: str) -> list[str]:
    return [
        "run",
        str(DATA / "qm40-procedure.yaml"),
        "--bench",
        str(DATA / "bench-kestrel.yaml"),
        "--readings",
        str(DATA / "qm40-procedure-readings.csv"),
        "--serial",
        "S",
        "--customer",
        "C",
        "--runs",
        str(tmp / "runs"),
        "--reports",
        str(tmp / "rep"),
        *extra,
    ]


class TestCheckReceived:
    def test_a_date_before_the_calibration_is_kept(self):
        """The day before, and the same day, are dates an item can be received on."""
        today = dt.date(2026, 12, 2)
        assert check_received("2026-12-01", today=today) == "2026-12-01"
        assert check_received("2026-12-02", today=today) == "2026-12-02"

    def test_a_date_after_the_calibration_is_refused(self):
        """A receipt after the calibration (today, for a run starting now) is in the future."""
        with pytest.raises(UnitError, match="after the date of calibration"):
            check_received("2026-12-03", today=dt.date(2026, 12, 2))

    def test_no_date_stays_none(self):
        """Not given: none recorded (the certificate says it was not recorded)."""
        assert check_received(None) is None


class FakeConsole:
    interactive = True

    def __init__(self, answers):
        self.answers, self.said = list(answers), []

    def ask(self, prompt):
        return self.answers.pop(0)

    def say(self, text):
        self.said.append(text)

    warn = say


class TestAskCondition:
    def test_asked_until_answered(self):
        """At the console the condition is asked again until it is said in words."""
        console = FakeConsole(["", "   ", "Dial glass cracked."])
        assert ask_condition(None, console, needed=True) == "Dial glass cracked."
        assert len(console.said) == 2
        assert all("[" not in said for said in console.said)  # plain words, no console markup

    def test_a_control_or_bidi_character_is_asked_again(self):
        """A condition holding a bidirectional override (which would reorder the words shown
        around it on the certificate) is refused at the prompt and asked again."""
        console = FakeConsole(["Case \u202eok", "Case ok"])
        assert ask_condition(None, console, needed=True) == "Case ok"
        assert "bidirectional" in console.said[0]

    def test_needed_and_not_askable_is_refused(self):
        """A scripted run at a real bench must be given it."""
        console = FakeConsole([])
        console.interactive = False
        with pytest.raises(UnitError, match="--condition"):
            ask_condition(None, console, needed=True)
        assert ask_condition(None, console, needed=False) is None

    def test_given_empty_is_refused(self):
        """An empty --condition is not a condition."""
        with pytest.raises(UnitError, match="empty"):
            ask_condition("  ", FakeConsole([]), needed=False)


class TestRunAtARealBench:
    def test_needs_a_lab_profile(self, at_the_bench, tmp_path, capsys):
        """Without --lab a run at a real bench is refused (the demo lab is for dry runs); no run is
        written."""
        assert main(run_args(tmp_path, "--condition", "as new")) == 1
        assert "needs the lab's profile (--lab FILE)" in capsys.readouterr().err
        assert not (tmp_path / "runs").exists()

    def test_needs_the_condition_on_receipt(self, at_the_bench, tmp_path, capsys):
        """A scripted run at a real bench without --condition is refused; no run is written."""
        assert main(run_args(tmp_path, "--lab", str(DATA / "lab-test.yaml"))) == 1
        assert "condition of the item on receipt" in capsys.readouterr().err
        assert not (tmp_path / "runs").exists()

    def test_a_receipt_in_the_future_is_refused(self, at_the_bench, tmp_path, capsys):
        """A receipt date after today (the calibration date) is refused; no run is written."""
        tomorrow = (dt.datetime.now(dt.timezone.utc).date() + dt.timedelta(days=1)).isoformat()
        assert (
            main(
                run_args(
                    tmp_path,
                    "--lab",
                    str(DATA / "lab-test.yaml"),
                    "--condition",
                    "as new",
                    "--received",
                    tomorrow,
                )
            )
            == 1
        )
        assert f"--received: {tomorrow} is after the date of calibration" in capsys.readouterr().err
        assert not (tmp_path / "runs").exists()

    def test_with_them_the_run_is_made(self, at_the_bench, tmp_path):
        """With the lab, the condition and a receipt date, the run is made as given."""
        from verirun.record.journal import load_record

        assert (
            main(
                run_args(
                    tmp_path,
                    "--lab",
                    str(DATA / "lab-test.yaml"),
                    "--condition",
                    "as new",
                    "--received",
                    "2025-01-10",
                )
            )
            == 0
        )
        (run,) = (tmp_path / "runs").iterdir()
        record = load_record(run)
        assert record.item.condition == "as new" and record.item.received == "2025-01-10"
        assert record.lab.name == "Kestrel Fen Metrology" and not record.bench.simulated


def test_input_closed_at_the_condition_question_exits_2_and_writes_no_run(tmp_path):
    """At the console with stdin closed, the question about the condition on receipt ends the
    command with exit 2 and no traceback, before any run folder is made."""
    import subprocess
    import sys

    cmd = [
        sys.executable,
        "-m",
        "verirun",
        *run_args(tmp_path, "--simulate", "--temperature", "23", "--humidity", "40"),
    ]
    cmd.remove("--readings")
    cmd.remove(str(DATA / "qm40-procedure-readings.csv"))
    result = subprocess.run(
        cmd, stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=60
    )
    assert result.returncode == 2, result.stderr
    assert "internal error" not in result.stderr and "Traceback" not in result.stderr
    assert "Condition of the item on receipt" in result.stdout
    assert not (tmp_path / "runs").exists()


def test_a_lab_prefix_that_could_be_a_dry_runs_is_refused(tmp_path):
    """A lab profile whose certificate prefix begins DRYRUN is refused with file, line and field:
    a calibration's number must never look like a dry run's."""
    from verirun.errors import ProcedureError
    from verirun.lab import load_lab

    lab = tmp_path / "lab.yaml"
    lab.write_text(
        (DATA / "lab-test.yaml")
        .read_text()
        .replace("certificate-prefix: KFM", "certificate-prefix: dryrun-7")
    )
    with pytest.raises(ProcedureError, match=r"lab.yaml:9: .*certificate-prefix.*DRYRUN begins"):
        load_lab(lab)


def test_a_person_listed_twice_is_refused(tmp_path):
    """Each person who may issue is listed once, so their role is never in doubt."""
    from verirun.errors import ProcedureError
    from verirun.lab import load_lab

    lab = tmp_path / "lab.yaml"
    lab.write_text(
        (DATA / "lab-test.yaml")
        .read_text()
        .replace(
            "    - {name: J. Ilesanmi,",
            "    - {name: A.  Thorneycroft, role: Technical Manager}\n    - {name: J. Ilesanmi,",
        )
    )
    with pytest.raises(ProcedureError, match="A. Thorneycroft listed more than once"):
        load_lab(lab)
