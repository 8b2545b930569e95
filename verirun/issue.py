"""Issue a certificate: a person the lab has authorised reviews a finished run and signs it.

Until then the run's certificate is a draft. Issuing appends an ``issue`` document to the run's
journal (chained like every other): who issued it, in which role from the lab profile, when, and
which revision and certificate number. The record is closed again and the certificate is
rendered as issued. A revision is issued once; a correction is an amendment, a new revision
issued in its turn. A dry run on the simulated calibrator is never issued.
"""

from __future__ import annotations

from pathlib import Path

from verirun.clock import SystemClock, iso
from verirun.errors import RecordError
from verirun.lab import people_who_issue
from verirun.locks import run_lock
from verirun.record.build import close_record
from verirun.record.documents import (
    AsFoundRevised,
    Correction,
    Issue,
    IssueEntry,
    Record,
    as_journaled,
    compose,
)
from verirun.record.journal import JOURNAL_NAME, Journal, load_record, read_journal
from verirun.record.verify import run_folder, verified_record


def issue(path: str | Path, *, by: str, lab: dict | None = None, clock=None) -> Record:
    """Issue the current revision of the run at ``path`` in the name of ``by``; return its record.

    Parameters
    ----------
    path
        The run folder (or its record or journal).
    by
        The name of the person issuing, exactly as the lab profile lists it.
    lab
        The lab profile (as the record holds one) whose people may issue; by default the lab
        the run was made under. It must be the same lab (name and certificate prefix).

    Raises
    ------
    RecordError
        If the run does not verify or is not complete, is a dry run, was issued already in this
        revision, or ``by`` is not a person the lab profile lists. Nothing is written then.
    """
    clock = clock or SystemClock()
    folder = run_folder(path)
    _issue(folder, by=by, lab=lab, clock=None)  # refused here, nothing is written
    # The run's one writer: two people issuing at once get one issue (the other is told the
    # run is busy, and then that it was issued already), and nobody amends it meanwhile.
    with run_lock(folder):
        return _issue(folder, by=by, lab=lab, clock=clock)


def _issue(folder: Path, *, by: str, lab: dict | None, clock) -> Record:
    """Refuse, or (given a ``clock``) journal the issue and close the record again."""
    from verirun.certificate.render import certificate_number, is_dry_run

    record = verified_record(folder)
    number = certificate_number(record)
    if is_dry_run(record):
        raise RecordError(
            f"{folder}: this is a dry run on the simulated calibrator, not a calibration;"
            f" its certificate {number} can never be issued"
        )
    if record.run.status != "complete":
        raise RecordError(
            f"{folder}: the run is {record.run.status}, not complete; resume it before"
            " its certificate can be issued"
        )
    from verirun.register.closing import needs_number
    from verirun.register.config import named

    if named() is not None and needs_number(record):
        raise RecordError(
            f"{folder}: the run waits for its certificate number from the lab register (it"
            " could not be reached when the run closed); send it with 'verirun register"
            " sync', then issue it: an issued certificate keeps its number"
        )
    revision = record.run.revision
    done = issued(record)
    if done is not None:
        raise RecordError(
            f"{folder}: certificate {number} was issued already, on {done.time[:10]} by"
            f" {done.by}; it is not issued twice. To correct it, amend the run"
            " ('verirun amend'): the new revision is then issued in its turn"
        )
    if lab is None:
        lab = as_journaled(record.lab)
    elif (lab.get("name"), lab.get("certificate_prefix")) != (
        record.lab.name,
        record.lab.certificate_prefix,
    ):
        raise RecordError(
            f"the lab profile is of {lab.get('name')!r}, but the run was made for"
            f" {record.lab.name!r}; give that lab's profile"
        )
    person = find_person(lab, by)
    if clock is None:  # the check before the lock is taken
        return record
    # A full disk or a folder made read-only is a StorageError, said with what to free or fix.
    with Journal(folder / JOURNAL_NAME) as journal:
        journal.append(
            compose(
                "issue",
                time=iso(clock.now()),
                by=person["name"],
                role=person["role"],
                revision=revision,
                certificate=number,
            )
        )
    return close_record(folder)


def find_person(lab: dict, name: str) -> dict:
    """The person of the lab profile named ``name`` (spaces at the ends and repeated inside
    ignored; otherwise exactly as listed).

    Raises
    ------
    RecordError
        If the lab profile lists nobody of that name, naming those it lists.
    """
    wanted = " ".join(name.split())
    people = people_who_issue(lab)
    for person in people:
        if " ".join(person["name"].split()) == wanted:
            return person
    listed = ", ".join(f"{p['name']} ({p['role']})" for p in people) or "nobody"
    raise RecordError(
        f"{wanted!r} is not among the people the lab profile authorises to issue"
        f" certificates ({listed}); nothing was issued"
    )


def earlier_revisions(path: str | Path) -> list[tuple[Record, dict]]:
    """Each earlier revision of a stored run and what replaced it, oldest first.

    The record of revision N is the record of the journal up to the document that began
    revision N + 1 (a correction, or an as-found revision), so it is verified as the journal
    is; what replaced it is that document's time and reason and the next revision's number.
    """
    from verirun.certificate.render import certificate_number
    from verirun.record.build import build_record

    folder = run_folder(path)
    read = read_journal(folder / JOURNAL_NAME)
    docs = read.documents
    if not any(isinstance(doc, _NEW_REVISION) for doc in read.models):
        return []  # one revision: nothing replaced (and nothing to verify here)
    verified_record(folder)
    out = []
    for position, doc in enumerate(read.models):
        if isinstance(doc, _NEW_REVISION):
            earlier = build_record(docs[:position], str(folder / JOURNAL_NAME))
            later = build_record(docs[: position + 1], str(folder / JOURNAL_NAME))
            out.append(
                (
                    earlier,
                    {"number": certificate_number(later), "time": doc.time, "reason": doc.reason},
                )
            )
    return out


#: The documents that begin a new revision of a run's record.
_NEW_REVISION = (Correction, AsFoundRevised)


def earlier_states(
    path: str | Path, record: Record, *, replaced_by: dict | None = None
) -> tuple[bytes, ...]:
    """The certificates of ``record``'s number (a revision of the stored run at ``path``) that
    its certificate may take the place of: its draft, as rendered before each issue of that
    revision, and, when ``replaced_by`` marks it replaced, the certificate as it was before.
    Any other certificate of that number is never overwritten."""
    from verirun.certificate.render import render_html
    from verirun.record.build import build_record

    folder = run_folder(path)
    read = read_journal(folder / JOURNAL_NAME)
    revision = record.run.revision
    out = []
    if replaced_by is not None:
        out.append(render_html(record).encode("utf-8"))
        kept = (
            folder / f"record.r{revision}.json"
        )  # as stored: a record of an earlier format has its own figures
        if kept.exists():
            out.append(render_html(load_record(kept)).encode("utf-8"))
    for position, doc in enumerate(read.models):
        if isinstance(doc, Issue) and doc.revision == revision:
            draft = build_record(read.documents[:position], str(folder / JOURNAL_NAME))
            out.append(render_html(draft).encode("utf-8"))
    return tuple(out)


def issued(record: Record) -> IssueEntry | None:
    """The issue of ``record``'s current revision (``None``: not issued yet)."""
    return next((i for i in record.issues or () if i.revision == record.run.revision), None)


def state_of(record: Record) -> str:
    """``"dry run"``, ``"draft"`` or ``"issued <date> by <name>"`` for the current revision."""
    from verirun.certificate.render import is_dry_run

    if is_dry_run(record):
        return "a dry run, never issued"
    revision = record.run.revision
    done = issued(record)
    if done is None:
        return f"draft of revision {revision}, not issued"
    return f"revision {revision} issued {done.time[:10]} by {done.by}, {done.role}"
