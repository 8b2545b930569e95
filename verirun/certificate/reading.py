"""What the customer reads on a certificate, worked out from the run record for the template.

The state of the certificate (a dry run, a draft for review, or issued, and whether a later
revision replaced it), the words in the lab's spelling, the operator's notes beside their
points, the changes an amendment made, the deviations (of both runs after an adjustment), and
the as-found and as-left results of each point side by side. The internal run log (hazard
confirmations, aborts, resumes) is the lab's record, never the customer's certificate.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from verirun.certificate.render import ResultRow, is_dry_run, printed
from verirun.record.documents import NoteEntry, PointResult, RangeEntry, Record

#: The words of the certificate that are spelt two ways; the lab profile chooses.
SPELLING = {
    "british": {
        "authorisation": "authorisation",
        "Authorisation": "Authorisation",
        "authorised": "authorised",
        "Authorised": "Authorised",
        "centre": "centre",
    },
    "american": {
        "authorisation": "authorization",
        "Authorisation": "Authorization",
        "authorised": "authorized",
        "Authorised": "Authorized",
        "centre": "center",
    },
}

#: verirun's own sentences (decision rules, say) are written in British spelling; these are the
#: words in them that American spelling writes otherwise.
_AMERICAN = {
    "favourable": "favorable",
    "favour": "favor",
    "centre": "center",
    "centred": "centered",
    "authorised": "authorized",
    "authorisation": "authorization",
    "behaviour": "behavior",
    "colour": "color",
    "metre": "meter",
    "analyse": "analyze",
}
_BRITISH_WORD = re.compile(
    r"\b(" + "|".join(sorted(_AMERICAN, key=len, reverse=True)) + r")\b", re.IGNORECASE
)


def spelt(text: str, variant: str) -> str:
    """One of verirun's own sentences in the lab's spelling (``"british"`` or ``"american"``)."""
    if variant != "american":
        return text

    def american(match: re.Match) -> str:
        word = _AMERICAN[match.group(0).lower()]
        return word.capitalize() if match.group(0)[0].isupper() else word

    return _BRITISH_WORD.sub(american, text)


#: How notes of the internal run log begin, in records of journal format 1 (whose notes are
#: not marked): the run's own lines, never an operator's note.
_LOG_NOTES = (
    "hazardous output ",
    "operator aborted the run",
    "run resumed after an interruption",
    "errors left in the calibrator's queue",
)
_REVISION_NOTE = re.compile(r"revision (\d+): ")


def reading_context(record: Record, *, replaced_by: dict | None = None) -> dict:
    """The template's values beyond the record itself (see the module's description)."""
    run = record.run
    issues = record.issues or []
    issue = next((i for i in issues if i.revision == run.revision), None)
    state = "dry-run" if is_dry_run(record) else ("issued" if issue else "draft")
    notes = customer_notes(record)
    changes = [note for note in notes if _is_change(record, note)]
    kept = [note for note in notes if note not in changes]
    by_point: dict[str, list[NoteEntry]] = {}
    for note in kept:
        if note.point:
            by_point.setdefault(note.point, []).append(note)
    known = {row.key for row in record.points}
    page_mark, watermark = _marks(state, replaced_by)
    return {
        "state": state,
        "issue": issue,
        "replaced_by": replaced_by,
        "replaces_issued": any(i.revision == run.revision - 1 for i in issues),
        "page_mark": page_mark,
        "watermark": watermark,
        "words": SPELLING[record.lab.spelling],
        "spelling": record.lab.spelling,
        "point_notes": by_point,
        "general_notes": [n for n in kept if not n.point or n.point not in known],
        "changes": changes,
        "environment_missing": [
            name
            for value, name in (
                (record.environment.temperature_c, "the laboratory temperature"),
                (record.environment.humidity_pct, "the relative humidity"),
            )
            if value is None
        ],
        "receipt_missing": not record.item.condition,
        "side_by_side": side_by_side(record) if record.as_found else [],
        "found_deviations": [
            row
            for row in (record.as_found.points if record.as_found else [])
            if row.verdict in ("skipped", "not-measured")
        ],
        "remarks": record.lab.remarks,
    }


def _marks(state: str, replaced_by: dict | None) -> tuple[str | None, str | None]:
    """The banner and the watermark on every page (none on a current, issued certificate)."""
    if state == "dry-run":
        return "DRY RUN ON THE SIMULATED CALIBRATOR: NOT A CALIBRATION", "DRY RUN"
    if replaced_by is not None:
        return f"REPLACED BY CERTIFICATE {replaced_by['number']}: NOT CURRENT", "REPLACED"
    if state == "draft":
        return "DRAFT FOR REVIEW: NOT ISSUED", "DRAFT"
    return None, None


def customer_notes(record: Record) -> list[NoteEntry]:
    """The notes the customer reads: the operator's and the record's corrections, without the
    internal run log (kept apart in records of journal format 3; recognised by its wording in
    earlier ones)."""
    if record.run_log is not None:
        return list(record.notes)
    return [note for note in record.notes if not note.text.startswith(_LOG_NOTES)]


def _is_change(record: Record, note: NoteEntry) -> bool:
    """True for the note a correction or an as-found revision wrote (they begin "revision N: ")."""
    if not _REVISION_NOTE.match(note.text):
        return False
    if note.point is None:
        return any(r.time == note.time for r in record.as_found_revisions or [])
    return any(row.key == note.point and row.corrected() is not None for row in record.points)


@dataclass(frozen=True, slots=True)
class Pair:
    """One step after an adjustment: its as-found row (``None``: the as-found run lacks the
    point) and its as-left row with its limits as printed."""

    found: PointResult | None
    left: ResultRow


@dataclass(frozen=True, slots=True)
class RangePairs:
    """One range of the side-by-side results, with the pair of rows of each of its steps."""

    range: RangeEntry
    pairs: tuple[Pair, ...]


def side_by_side(record: Record) -> list[RangePairs]:
    """Each range with its points, the as-found row and the as-left row of each step together."""
    found = {row.key: row for row in record.as_found.points}
    out = []
    for rng in record.ranges:
        rows = sorted((r for r in record.points if r.range == rng.id), key=lambda r: r.index)
        out.append(
            RangePairs(
                range=rng,
                pairs=tuple(
                    Pair(found=found.get(row.key), left=ResultRow(point=row, printed=printed(row)))
                    for row in rows
                ),
            )
        )
    return out
