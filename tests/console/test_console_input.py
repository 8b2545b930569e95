"""What the operator types means what the prompt says, and the prompt shows what to read.

In-process tests type at the console through a stand-in input function; the last class runs
`verirun run` in a pseudo-terminal, as at a bench.
"""

from __future__ import annotations

import io
import os
import sys
from pathlib import Path

import pytest
from rich.console import Console as RichConsole
from runkit import Terminal, build_run, fits_the_journal_schema, sim_resources

from verirun.console import Console
from verirun.errors import RunAborted
from verirun.procedure.load import load_procedure_text
from verirun.record.journal import confirmed_steps, read_journal

DATA = Path(__file__).resolve().parents[1] / "data"

METER = (DATA / "console-input-procedure.yaml").read_text(encoding="utf-8")


class Typist:
    """Types the given lines at successive prompts, recording every prompt."""

    def __init__(self, lines):
        self.lines = list(lines)
        self.prompts = []

    def __call__(self, prompt):
        self.prompts.append(prompt)
        if not self.lines:
            raise AssertionError(f"unexpected prompt {prompt!r}")
        return self.lines.pop(0)


def run_typing(tmp_path, lab_path, lines, *, show_window=False):
    """Run the console test procedure with ``lines`` typed; return what the run left."""
    (raw,) = sim_resources(tmp_path)
    out = io.StringIO()
    typist = Typist(lines)
    console = Console(
        RichConsole(file=out, width=200, highlight=False),
        input_func=typist,
        show_window=show_window,
    )
    error, finished = None, None
    try:
        finished = build_run(
            runs_dir=tmp_path / "runs",
            procedure=load_procedure_text(METER, "ci.yaml"),
            bench=DATA / "bench-test.yaml",
            readings=None,
            console=console,
            lab=lab_path,
            item={"serial": "S", "asset": None, "condition": "as new", "received": None},
            calibrator=raw,
        )
    except RunAborted as exc:
        error = exc
    run_dir = finished.run_dir if finished else error.run_dir
    docs = read_journal(run_dir / "journal.jsonl").documents
    return docs, out.getvalue(), typist, raw, finished


#: Typed at the prompts for a plain run, by step: connect, 5 V, 10 V, connect, 10 mA, connect,
#: 1.2 kΩ, connect, hazard confirmation, 80 V.
PLAIN = ["", "5", "10", "", "10", "", "1.2k", "", "yes", "80"]


def readings(docs):
    return [(d["index"] + 1, d["typed"], d["reading"]) for d in docs if d["kind"] == "observation"]


class TestBareNumbersAndPrefixes:
    def test_bare_number_is_in_the_unit_the_prompt_shows(self, tmp_path, demo_lab_path):
        """On a 50 mA range the prompt says mA and a bare 10 is 10 mA (0.01 A), not 10 A; on an
        ohms range of centre 1.2 kΩ the prompt says kΩ and `1.2k` is 1200 Ω (SI prefixes,
        SI Brochure 9th ed. 3)."""
        docs, out, typist, raw, _ = run_typing(tmp_path, demo_lab_path, PLAIN)
        assert any("reading in mA" in p for p in typist.prompts)
        assert any("reading in kΩ" in p for p in typist.prompts)
        got = readings(docs)
        assert got[2] == (3, "10", pytest.approx(0.010))
        assert got[3] == (4, "1.2k", pytest.approx(1200.0))

    def test_over_range_message_gives_the_bounds_accepted(self, tmp_path, demo_lab_path):
        """The refusal names the bounds the check applies: 5 % past each end of 0-10 V (-0.5 V to
        10.5 V), and 10.5 itself is accepted (common practice, no source: a pointer just past
        the end can still be read)."""
        docs, out, *_ = run_typing(tmp_path, demo_lab_path, ["", "10.6", "5", "10.5", *PLAIN[3:]])
        assert "a reading from -0.5 V to 10.5 V is accepted" in out
        assert readings(docs)[1][1] == "10.5"


class TestLeadsPrompt:
    def test_value_typed_at_the_leads_prompt_is_refused_not_swallowed(
        self, tmp_path, demo_lab_path
    ):
        """A reading typed while the output is in standby is refused with the reason and the
        prompt asked again; it is not journaled."""
        docs, out, typist, *_ = run_typing(tmp_path, demo_lab_path, ["4.9", "", *PLAIN[1:]])
        assert "not taken: the output is in standby" in out
        assert [t for _, t, _ in readings(docs)][0] == "5"

    def test_abort_at_the_leads_prompt(self, tmp_path, demo_lab_path):
        """`abort` at the leads prompt stops the run, resumable, with the output off."""
        docs, out, typist, raw, _ = run_typing(tmp_path, demo_lab_path, ["abort"])
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "aborted"
        assert raw.query("OUTP?") in ("0", "OFF")


class TestGrossReading:
    def test_far_off_reading_is_asked_about_and_kept_on_yes(self, tmp_path, demo_lab_path):
        """8 V at 5 V on a ± 0.2 V window (2 % of 10 V) is 15 tolerances off: it is asked about
        (threshold three tolerances, common practice, no source), and kept on yes."""
        docs, out, typist, *_ = run_typing(tmp_path, demo_lab_path, ["", "8", "yes", *PLAIN[2:]])
        assert any("is 15.0 tolerances from the nominal 5 V" in p for p in typist.prompts)
        assert readings(docs)[0][1] == "8"

    def test_far_off_reading_replaced_by_the_next_typed(self, tmp_path, demo_lab_path):
        """Typing another value instead of yes takes that one; the far-off one is not journaled."""
        docs, *_ = run_typing(tmp_path, demo_lab_path, ["", "8", "5.1", *PLAIN[2:]])
        assert readings(docs)[0][1] == "5.1" and len(readings(docs)) == 5
        # What was typed is kept: the far-off reading is journaled as a note before the reading.
        notes = [d for d in docs if d["kind"] == "note" and "asked about" in d["text"]]
        assert len(notes) == 1 and "'8'" in notes[0]["text"] and "'5.1'" in notes[0]["text"]
        assert docs.index(notes[0]) < next(
            i for i, d in enumerate(docs) if d["kind"] == "observation"
        )

    def test_a_signal_after_the_note_still_journals_the_reading(
        self, tmp_path, demo_lab_path, monkeypatch
    ):
        """A kill request taken just after the note on the replaced reading is journaled acts
        only once the reading the operator typed instead is journaled too: the note never
        stands without the entry it speaks of."""
        import signal

        from verirun.record.journal import Journal

        real = Journal.append

        def append_then_signal(self, doc):
            written = real(self, doc)
            if doc.get("kind") == "note" and "asked about" in doc.get("text", ""):
                os.kill(os.getpid(), signal.SIGTERM)
                sum(range(10))  # as the interpreter would, at the next instructions
            return written

        monkeypatch.setattr(Journal, "append", append_then_signal)
        with pytest.raises(KeyboardInterrupt, match="SIGTERM") as stopped:
            run_typing(tmp_path, demo_lab_path, ["", "8", "5.1", *PLAIN[2:]])
        docs = read_journal(stopped.value.run_dir / "journal.jsonl").documents
        note = next(i for i, d in enumerate(docs) if d["kind"] == "note" and "asked" in d["text"])
        assert docs[note + 1]["kind"] == "observation" and docs[note + 1]["typed"] == "5.1"
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "aborted"

    def test_same_far_off_reading_twice_is_kept(self, tmp_path, demo_lab_path):
        """Typing the same far-off reading again confirms it."""
        docs, *_ = run_typing(tmp_path, demo_lab_path, ["", "8", "8", *PLAIN[2:]])
        assert readings(docs)[0][1] == "8"

    def test_three_tolerances_exactly_is_not_asked(self, tmp_path, demo_lab_path):
        """5.6 V is exactly three tolerances (3 × 0.2 V) from 5 V: on the limit, not asked."""
        docs, out, typist, *_ = run_typing(tmp_path, demo_lab_path, ["", "5.6", *PLAIN[2:]])
        assert not any("tolerances from" in p for p in typist.prompts)


class TestUndo:
    def test_undo_withdraws_the_last_reading_and_measures_it_again(self, tmp_path, demo_lab_path):
        """`undo` at step 2 journals a withdrawal of step 1's reading, measures step 1 again, then
        step 2; the record holds the new reading and says what was withdrawn."""
        docs, out, typist, raw, finished = run_typing(
            tmp_path, demo_lab_path, ["", "5.5", "undo", "5.05", "10", *PLAIN[3:]]
        )
        kinds = [d["kind"] for d in docs if d["kind"] in ("observation", "withdrawal")]
        assert kinds[:4] == ["observation", "withdrawal", "observation", "observation"]
        withdrawal = next(d for d in docs if d["kind"] == "withdrawal")
        assert withdrawal["typed"] == "5.5" and withdrawal["index"] == 0
        assert finished.record.points[0].typed == "5.05"
        # The withdrawal is the run's internal log, not a note for the customer.
        assert any("'5.5' of step 1 withdrawn" in n.text for n in finished.record.run_log)
        assert not any("withdrawn" in n.text for n in finished.record.notes)
        fits_the_journal_schema(docs)

    def test_undo_on_another_range_asks_for_the_leads_again(self, tmp_path, demo_lab_path):
        """Undo at the first step of a new range goes back to the earlier range and asks for its
        leads, then for this range's again."""
        docs, out, typist, *_ = run_typing(
            tmp_path, demo_lab_path, ["", "5", "10", "", "undo", "", "9.9", "", "10", *PLAIN[5:]]
        )
        # The journal keeps the withdrawn 10 V; step 2's 9.9 V supersedes it, then step 3's 10 mA.
        assert [(n, t) for n, t, _ in readings(docs)][:4] == [
            (1, "5"),
            (2, "10"),
            (2, "9.9"),
            (3, "10"),
        ]
        assert sum("Press Enter" in p for p in typist.prompts) == 6

    def test_nothing_to_undo(self, tmp_path, demo_lab_path):
        """Undo before any reading says there is nothing to undo and asks again."""
        docs, out, *_ = run_typing(tmp_path, demo_lab_path, ["", "undo", *PLAIN[1:]])
        assert "nothing to undo" in out and not any(d["kind"] == "withdrawal" for d in docs)

    def test_a_withdrawn_point_is_pending_on_resume(self):
        """A step whose entry was withdrawn is measured again when the run is resumed; a step is
        told by its index, so a repeat of the same value is a step of its own."""
        from verirun.record.documents import validate_document

        chained = {"seq": 0, "prev": "0" * 64, "time": "2026-01-05T10:00:00Z", "typed": "1"}
        measured = {"kind": "observation", "range": "r", "function": "dcv", "reading": 1.0}
        measured["applied"] = {"value": 1.0, "frequency": None}
        docs = [
            validate_document({**chained, **measured, "point": "a", "index": 0}),
            validate_document({**chained, **measured, "point": "b", "index": 1}),
            validate_document({**chained, **measured, "point": "b", "index": 2}),
            validate_document(
                {**chained, "kind": "withdrawal", "point": "b", "index": 2, "reason": "undo"}
            ),
        ]
        assert confirmed_steps(docs) == frozenset({0, 1})


class TestHazardPrompt:
    def test_y_confirms(self, tmp_path, demo_lab_path):
        """`y` confirms the hazardous switch-on, journaled as confirmed."""
        lines = PLAIN[:8] + ["y", "80"]
        docs, *_ = run_typing(tmp_path, demo_lab_path, lines)
        assert any(d.get("hazardous") and "confirmed by the operator" in d["text"] for d in docs)

    def test_skip_skips_the_point_and_the_run_goes_on(self, tmp_path, demo_lab_path):
        """`skip` skips the hazardous point (journaled with the reason) without sourcing it."""
        docs, out, typist, raw, finished = run_typing(tmp_path, demo_lab_path, PLAIN[:8] + ["skip"])
        skips = [d for d in docs if d["kind"] == "skip"]
        assert len(skips) == 1 and "hazardous output declined" in skips[0]["reason"]
        fits_the_journal_schema(docs)
        assert finished.record.run.status == "complete"
        assert raw.query("VOLT?") != "80.0" and raw.query("OUTP?") in ("0", "OFF")


class TestWhatToRead:
    def test_unit_and_scale_at_every_step(self, tmp_path, demo_lab_path):
        """Every step says the unit to read in and, where the range names it, the scale."""
        docs, out, *_ = run_typing(tmp_path, demo_lab_path, PLAIN)
        assert "read in V on: black DC scale, 0-10" in out and "read in mA" in out

    def test_ohms_point_shows_the_pointer_position(self, tmp_path, demo_lab_path):
        """At the centre value of a series-ohms scale the pointer stands at mid-scale: 50° of a
        100° arc (f = Rc / (Rc + Rx) = 1/2), on the 1.2 kΩ mark; the window is not shown."""
        docs, out, *_ = run_typing(tmp_path, demo_lab_path, PLAIN)
        assert "pointer expected at 50.0° from the left end, on the 1.2 kΩ mark" in out
        assert "window 47.5° to 52.5°" not in out

    def test_window_shown_with_the_option(self, tmp_path, demo_lab_path):
        """With show_window, the allowed window along the arc (± 2.5°) and in the value are
        shown."""
        docs, out, *_ = run_typing(tmp_path, demo_lab_path, PLAIN, show_window=True)
        assert "window 47.5° to 52.5° from the left end" in out
        assert "window 4.8 V to 5.2 V" in out


@pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")
class TestAtTheTerminal:
    def test_a_run_typed_at_a_terminal(self, tmp_path):
        """In a pseudo-terminal: a value at the leads prompt refused, a decimal comma refused, a
        gross reading asked about, undo, a bare number in mA, `y` at the hazard prompt, the
        pointer position shown; the run completes and the journal holds what was meant."""
        term = Terminal(
            [
                sys.executable,
                "-m",
                "verirun",
                "run",
                str(DATA / "bench-meter.yaml"),
                "--bench",
                str(DATA / "bench-test.yaml"),
                "--simulate",
                "--serial",
                "PTY-1",
                "--customer",
                "C",
                "--temperature",
                "23",
                "--humidity",
                "40",
                "--runs",
                "runs",
                "--reports",
                "rep",
            ],
            cwd=tmp_path,
        )
        try:
            # Not given on the command line: the condition on receipt is asked, in words.
            term.expect("Condition of the item on receipt")
            term.type("Dial glass cracked; reads.")
            term.expect("Press Enter")
            term.type("5")
            term.expect("not taken")
            term.expect("Press Enter")
            term.type("")
            term.expect("reading in V")
            term.type("2,05")
            term.expect("decimal point")
            term.expect("reading in V")
            term.type("2.05")
            term.expect("reading in V")
            term.type("8")
            term.expect("tolerances from the nominal 5 V")
            term.type("5")
            term.expect("reading in V")  # step 3, 10 V
            term.type("undo")
            term.expect("withdrawn")
            term.expect("reading in V")  # step 2 again
            term.type("5.05")
            term.expect("reading in V")  # step 3
            term.type("9.9")
            term.expect("Press Enter")  # dcv-100
            term.type("")
            term.expect("(or y)")
            term.type("y")
            term.expect("reading in V")
            term.type("80.5")
            term.expect("Press Enter")  # dca-50m
            term.type("")
            term.expect("reading in mA")
            term.type("10.25")
            term.expect("reading in mA")
            term.type("49.5 mA")
            term.expect("Press Enter")  # ohm-x1
            term.type("")
            term.expect("pointer expected at 80.0° from the left end, on the 3 Ω mark")
            term.expect("reading in Ω")
            term.type("3.1")
            term.expect("reading in Ω")
            term.type("12")
            term.expect("reading in Ω")
            term.type("47")
            term.expect("Overall")
        finally:
            code = term.close()
        assert code == 0
        run_dir = next((tmp_path / "runs").iterdir())
        docs = read_journal(run_dir / "journal.jsonl").documents
        got = readings(docs)
        assert [t for _, t, _ in got] == [
            "2.05",
            "5",
            "5.05",
            "9.9",
            "80.5",
            "10.25",
            "49.5 mA",
            "3.1",
            "12",
            "47",
        ]
        assert got[5][2] == pytest.approx(0.01025)
        assert sum(d["kind"] == "withdrawal" for d in docs) == 1
