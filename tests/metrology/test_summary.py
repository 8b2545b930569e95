"""The statement of conformity: counts of the four statements, rejections by cause, meanings."""

from __future__ import annotations

import pytest

from verirun.metrology.summary import Judged, label, summarise


def judged(*items):
    return [Judged(key=f"p{i}", verdict=v, within_tolerance=w) for i, (v, w) in enumerate(items)]


class TestSummarise:
    def test_counts_all_four_statements(self):
        """The non-binary rule's four statements (ILAC-G8:09/2019 4.2.3) are each counted."""
        s = summarise(
            judged(
                ("pass", True),
                ("conditional-pass", True),
                ("conditional-fail", False),
                ("fail", False),
                ("skipped", None),
                ("not-measured", None),
            ),
            "non-binary",
        )
        assert s.counts() == {
            "points": 6,
            "pass": 1,
            "conditional-pass": 1,
            "conditional-fail": 1,
            "fail": 1,
            "skipped": 1,
            "not-measured": 1,
        }
        assert s.counts_text() == "1 pass, 1 conditional pass, 1 conditional fail, 1 fail"

    def test_two_conditional_fails_are_a_statement(self):
        """Two conditional fails and nothing else still make a statement (ISO/IEC 17025:2017
        7.8.6.2): not "no results were measured"."""
        s = summarise(
            judged(("conditional-fail", False), ("conditional-fail", False)), "non-binary"
        )
        assert s.overall == "conditional-fail"
        assert "No results were measured" not in s.statement()
        assert "0 pass, 0 conditional pass, 2 conditional fail, 0 fail" in s.statement()
        assert "A conditional fail means" in s.statement()

    @pytest.mark.parametrize(
        ("verdicts", "overall"),
        [
            (["pass", "pass"], "pass"),
            (["pass", "conditional-pass"], "conditional-pass"),
            (["conditional-pass", "conditional-fail"], "conditional-fail"),
            (["conditional-fail", "fail", "pass"], "fail"),
            ([], "none"),
        ],
    )
    def test_overall_is_the_least_favourable(self, verdicts, overall):
        """The item's outcome is its least favourable statement (common practice, no source)."""
        assert (
            summarise(
                judged(*[(v, v in ("pass", "conditional-pass")) for v in verdicts]), "non-binary"
            ).overall
            == overall
        )

    def test_guard_band_rejections_are_named(self):
        """Under a guarded rule (ILAC-G8:09/2019 4.2.2) a reading within tolerance but outside
        the acceptance limits is rejected by the guard band, not "outside its tolerance"."""
        s = summarise(judged(("pass", True), ("fail", True), ("fail", False)), "guarded")
        assert s.guard_band_rejections == ("p1",)
        assert [r.cause for r in s.rejections] == ["guard-band", "outside-tolerance"]
        words = s.statement()
        assert "1 lies outside its tolerance limits" in words
        assert "1 lies within its tolerance limits but outside the acceptance limits" in words
        assert "2 of 3 points are not accepted" in words

    def test_pass_statement(self):
        """Every point passing gives a statement that the item conforms, with its counts."""
        words = summarise(judged(("pass", True), ("pass", True)), "simple").statement()
        assert "the item conforms to its specification" in words and "2 pass" in words

    def test_nothing_measured(self):
        """With no measured point no statement of conformity is made."""
        s = summarise(judged(("skipped", None)), "simple")
        assert s.overall == "none" and s.statement().startswith("No results were measured")

    def test_refuses_unknown_and_misplaced_verdicts(self):
        """An unknown verdict, or a conditional one under a binary rule, is refused."""
        with pytest.raises(ValueError, match="unknown verdict"):
            summarise(judged(("maybe", True)), "simple")
        with pytest.raises(ValueError, match="makes no conditional-pass"):
            summarise(judged(("conditional-pass", True)), "guarded")


class TestLabel:
    @pytest.mark.parametrize(
        "verdict",
        ["pass", "conditional-pass", "conditional-fail", "fail", "skipped", "not-measured", "none"],
    )
    def test_never_empty(self, verdict):
        """Every verdict has a printed word (common practice, no source)."""
        assert label(verdict).strip()

    def test_conditional_words(self):
        """Conditional statements print as two words (ILAC-G8:09/2019 4.2.3)."""
        assert label("conditional-fail") == "CONDITIONAL FAIL"

    def test_unknown_is_refused(self):
        """An unknown verdict has no label."""
        with pytest.raises(ValueError):
            label("")
