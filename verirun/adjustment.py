"""An adjustment between two runs of one item: the as-found run, then one as-left run.

The as-left run carries the as-found results in its journal, so that its certificate (both sets
side by side) is a function of its own record. When the as-found run is amended, its new
results are appended to the as-left run's journal as an ``as-found`` document: a new revision of
the combined certificate, issued in its turn.
"""

from __future__ import annotations

from pathlib import Path

from verirun.clock import SystemClock, iso
from verirun.errors import RecordError
from verirun.record.build import as_found_part, close_record
from verirun.record.documents import Record, compose
from verirun.record.journal import JOURNAL_NAME, Journal, read_start


def check_as_found(
    record: Record, *, run: Path, customer: dict, others: list[Path], simulated: bool | None = None
) -> None:
    """Refuse an as-left run for an as-found run of another customer, or one that has an
    as-left run already (looked for beside it and in ``others``, folders of run folders), or
    (given ``simulated``, the as-left run's) one a dry run where the other is not.

    Raises
    ------
    RecordError
        Naming the other customer, or the as-left run there is already.
    """
    theirs = record.customer.name.strip()
    if theirs != (customer.get("name") or "").strip():
        raise RecordError(
            f"{run}: the as-found run is for customer {theirs!r}, not {customer.get('name')!r};"
            " an as-left run is of the same item for the same customer"
        )
    if simulated is not None and record.bench.simulated != simulated:
        raise RecordError(
            f"{run}: the as-found run was"
            f" {'a dry run' if record.bench.simulated else 'at a real bench'};"
            " the as-left run must be made the same way, or the certificate would mix a dry run"
            " with a calibration"
        )
    already = as_left_runs(record.run.uid, [Path(run).resolve().parent, *others])
    if already:
        raise RecordError(
            f"{run}: the as-found run has an as-left run already ({already[0]}); one"
            " as-left run follows each as-found run (amend that one if it needs correcting)"
        )


def as_left_runs(uid: str, folders: list[Path]) -> list[Path]:
    """The run folders in ``folders`` whose journal starts as the as-left run of run ``uid``."""
    found = []
    for folder in dict.fromkeys(Path(f).resolve() for f in folders):
        if not folder.is_dir():
            continue
        for run in sorted(folder.iterdir()):
            journal = run / JOURNAL_NAME
            if not journal.is_file():
                continue
            start = read_start(journal)  # the first line only: a folder may hold many runs
            if start is not None and start.as_found is not None and start.as_found.run == uid:
                found.append(run)
    return found


def revise_as_left(
    found_run: Path, *, reason: str, operator: str, clock=None, others: list[Path] = ()
) -> list[tuple[Path, Record]]:
    """After the as-found run at ``found_run`` was amended, give its as-left run (if any) the
    new as-found results; return each as-left folder with its new record."""
    from verirun.record.verify import verified_record

    clock = clock or SystemClock()
    found = verified_record(found_run)
    out = []
    for left in as_left_runs(found.run.uid, [Path(found_run).resolve().parent, *others]):
        previous = verified_record(left).as_found
        as_found = as_found_part(
            found, adjustment=previous.adjustment if previous is not None else ""
        )
        with Journal(left / JOURNAL_NAME) as journal:
            journal.append(
                compose(
                    "as-found",
                    time=iso(clock.now()),
                    as_found=as_found,
                    reason=reason,
                    operator=operator,
                )
            )
        out.append((left, close_record(left)))
    return out
