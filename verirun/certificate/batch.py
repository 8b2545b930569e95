"""Certify many stored runs: find them, render each (on both cores), report every failure.

One bad record never stops the batch: each run is rendered on its own and its failure is
collected with its reason. Each certificate names the template version it was rendered with;
re-rendering over an existing certificate reports a change of version, and would report any
change of bytes under the same version (which must not happen).
"""

from __future__ import annotations

import os
import re
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path

from verirun.record.journal import JOURNAL_NAME, RECORD_NAME

_VERSION_META = re.compile(rb'<meta name="verirun-template" content="([^"]*)">')

#: Below this many runs a batch renders in this process; the pool costs more than it saves.
POOL_THRESHOLD = 16


@dataclass(frozen=True)
class Outcome:
    """What happened to one run of a batch."""

    run: str
    certificate: str | None = None
    pdf: str | None = None
    error: str | None = None
    note: str | None = None
    #: A dry run, a draft, or issued by whom (see :func:`verirun.issue.state_of`).
    state: str | None = None
    #: The certificates of earlier revisions, rendered again marked as replaced.
    replaced: tuple[str, ...] = ()


def find_runs(paths: list[Path]) -> list[Path]:
    """Run folders named by ``paths``: a run folder, a record file, or a folder of run folders."""
    found: list[Path] = []
    for path in paths:
        path = Path(path)
        if path.is_file():
            found.append(path.parent)
        elif (path / RECORD_NAME).exists() or (path / JOURNAL_NAME).exists():
            found.append(path)
        elif path.is_dir():
            found.extend(
                sorted(
                    p
                    for p in path.iterdir()
                    if p.is_dir() and ((p / RECORD_NAME).exists() or (p / JOURNAL_NAME).exists())
                )
            )
        else:
            found.append(path)  # reported as missing by certify_one
    return found


def certify_one(run: Path, reports_dir: Path, pdf: bool = False) -> Outcome:
    """Verify and render one run; any failure comes back as the outcome's ``error``."""
    from verirun import storage
    from verirun.certificate.render import (
        TEMPLATE_VERSION,
        certificate_path,
        keep_issued,
        render_html,
        write_pdf,
    )
    from verirun.errors import VerirunError
    from verirun.issue import earlier_revisions, earlier_states, state_of
    from verirun.record.verify import verified_record

    try:
        if not Path(run).exists():
            return Outcome(run=str(run), error=f"{run}: no such run folder")
        record = verified_record(run)
        if record.run.status != "complete":
            return Outcome(
                run=str(run),
                error=f"{run}: the run is {record.run.status}, not complete;"
                " resume it before a certificate can be issued",
            )
        html = render_html(record).encode("utf-8")
        path = certificate_path(record, reports_dir)
        storage.make_folder(path.parent)
        was = _version_of(path)
        note = None
        kept = keep_issued(path, html, earlier=earlier_states(run, record))
        if kept != "same":
            storage.write_atomic(path, [html])
            if kept == "moved":
                note = (
                    f"re-rendered with certificate template {TEMPLATE_VERSION} (was {was};"
                    " the earlier one is kept beside it)"
                )
        pdf_path = write_pdf(html.decode("utf-8"), path.with_suffix(".pdf")) if pdf else None
        replaced = []
        for earlier, replaced_by in earlier_revisions(run):  # each stays readable, marked replaced
            old = certificate_path(earlier, reports_dir)
            marked = render_html(earlier, replaced_by=replaced_by).encode("utf-8")
            if (
                keep_issued(
                    old, marked, earlier=earlier_states(run, earlier, replaced_by=replaced_by)
                )
                != "same"
            ):
                storage.write_atomic(old, [marked])
            replaced.append(str(old))
        return Outcome(
            run=str(run),
            certificate=str(path),
            pdf=str(pdf_path) if pdf_path else None,
            note=note,
            state=state_of(record),
            replaced=tuple(replaced),
        )
    except VerirunError as exc:
        return Outcome(run=str(run), error=str(exc))
    except Exception as exc:  # one bad record never stops the batch
        return Outcome(run=str(run), error=f"{run}: {type(exc).__name__}: {exc}")


def _version_of(path: Path) -> str | None:
    """The template version of the certificate at ``path`` (``None`` if there is none)."""
    try:
        match = _VERSION_META.search(path.read_bytes())
    except OSError:
        return None
    return match.group(1).decode("ascii", "replace") if match else "unknown"


def _star(args):
    return certify_one(*args)


def certify_many(
    runs: list[Path],
    reports_dir: Path,
    *,
    pdf: bool = False,
    workers: int | None = None,
    progress=None,
) -> list[Outcome]:
    """Certify every run; ``progress(outcome)`` is called as each finishes. Uses every core."""
    workers = workers or min(len(runs), os.cpu_count() or 1)
    jobs = [(Path(run), Path(reports_dir), pdf) for run in runs]
    outcomes = []
    if workers <= 1 or len(jobs) < POOL_THRESHOLD:
        for job in jobs:
            outcomes.append(certify_one(*job))
            if progress:
                progress(outcomes[-1])
        return outcomes
    with ProcessPoolExecutor(max_workers=workers) as pool:
        for outcome in pool.map(_star, jobs, chunksize=max(1, len(jobs) // (workers * 8))):
            outcomes.append(outcome)
            if progress:
                progress(outcome)
    return outcomes
