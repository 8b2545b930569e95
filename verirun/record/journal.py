"""The journal of a run and the run record it closes into.

The journal is append-only JSON Lines: one document per line, of the kinds
:mod:`verirun.record.documents` defines (and validates each against as it is read back), each line
written whole and fsynced before the run goes on, each carrying its sequence number and the
SHA-256 of the line before it so that an edit, a gap or a reordering shows. A journal is read
back (:func:`read_journal`) both as its parsed lines, which the chain and the record are made
from, and as the documents' frozen models, which everything outside this package reads; the few
questions asked of a run's documents (its start, its confirmed steps, its latest time and
conditions) are answered here. The run record (built by :mod:`verirun.record.build`) is written
and read here too.
"""

from __future__ import annotations

import errno
import hashlib
import json
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

from verirun import storage
from verirun.errors import RecordError
from verirun.interrupts import deferred_signals
from verirun.locks import RUN_LOCK_NAME
from verirun.record.documents import (
    RECORD_FORMAT,
    Document,
    Observation,
    Record,
    Resume,
    Skip,
    Start,
    Withdrawal,
    as_journaled,
    parse_json,
    read_document,
)

JOURNAL_NAME = "journal.jsonl"
RECORD_NAME = "record.json"
GENESIS = "0" * 64


def dumps(doc: Any) -> str:
    """Canonical JSON: sorted keys, no NaN, UTF-8 text kept as is; the same data, the same bytes."""
    return json.dumps(
        doc, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(",", ":")
    )


def line_hash(line: str) -> str:
    """SHA-256 of one journal line (without its newline)."""
    return hashlib.sha256(line.encode("utf-8")).hexdigest()


def run_folder_name(serial: str, uid: str, started) -> str:
    """The run's folder name: item serial, date and the start of its uid, made file-safe."""
    slug = re.sub(r"[^A-Za-z0-9_-]+", "-", serial).strip("-")[:40] or "item"
    return f"{started:%Y%m%d-%H%M%S}-{slug}-{uid[:8]}"


_RUN_FOLDER = re.compile(r"\d{8}-\d{6}-[A-Za-z0-9_-]{1,40}-[0-9a-f]{8}")
#: What a run folder holds before its start document is journaled.
_BEFORE_START = {JOURNAL_NAME, RUN_LOCK_NAME, "simulated-calibrator"}


def never_started_text(folder: Path) -> str:
    """What to tell the operator of a folder that :func:`never_started`."""
    return (
        f"{folder}: this run never started (the process ended before its start was journaled):"
        " nothing was measured and there is nothing to resume or verify; the next run in"
        f" {folder.parent} removes the folder, or remove it by hand"
    )


def never_started(folder: Path) -> bool:
    """Whether ``folder`` was made for a run by a process that ended (killed, or signalled
    before verirun could act) before the run's start document was journaled.

    Such a folder has a run folder's name, holds nothing but what a run makes before its start
    (the lock, the simulated calibrator's file) and a journal that is missing or holds no whole
    line: nothing was measured in it, and no resume can continue it."""
    folder = Path(folder)
    if not _RUN_FOLDER.fullmatch(folder.name) or folder.is_symlink() or not folder.is_dir():
        return False
    try:
        # A closed run has its record: one look, rather than a listing of every closed run's
        # folder at each run's start (5,000 run folders: 0.23 s -> 0.07-0.10 s).
        if (folder / RECORD_NAME).exists():
            return False
        if not {entry.name for entry in folder.iterdir()} <= _BEFORE_START:
            return False
        journal = folder / JOURNAL_NAME
        return not journal.exists() or b"\n" not in journal.read_bytes()
    except OSError:
        return False


class Journal:
    """An append-only journal file; every :meth:`append` is on disk before it returns.

    Parameters
    ----------
    path
        The journal file. Appending to an existing journal (a resumed run) continues its chain.
    """

    def __init__(self, path: str | Path):
        self.path = Path(path)
        self._seq = 0
        self._prev = GENESIS
        #: The torn last line dropped when an interrupted journal was reopened, if any.
        self.recovered: str | None = None
        if self.path.is_symlink():  # never written through: see verirun.storage
            raise storage.storage_error(
                OSError(errno.ELOOP, "is a symbolic link", str(self.path)), self.path
            )
        if self.path.exists():
            read = read_journal(self.path)
            self._repair(read)
            if read.documents:
                self._seq = read.documents[-1]["seq"] + 1
                self._prev = line_hash(dumps(read.documents[-1]))
        storage.make_folder(self.path.parent)
        new = not self.path.exists()
        # Unbuffered, appending, not through a symlink: a failed write leaves nothing queued to
        # be written later, and what did reach the file is cut off again (see _write_line).
        self._fd = storage.open_append(self.path)
        if new:  # the new file's name on disk too, or a power cut could take the whole journal
            storage.sync_folder(self.path.parent)

    def _repair(self, read: "JournalRead") -> None:
        """Make the file end at a whole line: cut a torn last line, end a whole one with a
        newline."""
        raw = self.path.read_bytes()
        if not raw or raw.endswith(b"\n"):
            return
        if read.torn_line is not None:
            self.recovered = read.torn_line
            with open(self.path, "r+b") as fh:
                fh.truncate(raw.rfind(b"\n") + 1)
                fh.flush()
                os.fsync(fh.fileno())
        else:
            with open(self.path, "ab") as fh:
                fh.write(b"\n")
                fh.flush()
                os.fsync(fh.fileno())

    def append(self, doc: dict) -> dict:
        """Write ``doc`` (made by :func:`verirun.record.documents.compose`) as one line with its
        sequence number and chain hash; fsync; return it.

        A critical section (:mod:`verirun.interrupts`): a signal arriving meanwhile acts only once
        the line is on disk and the chain has moved past it, so no two lines share a number."""
        full = {**doc, "seq": self._seq, "prev": self._prev}
        line = dumps(full)
        with deferred_signals():
            self._write_line(line)
            self._seq += 1
            self._prev = line_hash(line)
        return full

    def _write_line(self, line: str) -> None:
        """Write one line and fsync it, or leave the file as it was and raise StorageError: a
        full disk or a failing device never leaves a part of a line behind."""
        if self._fd is None:
            raise RecordError(f"{self.path}: the journal is closed")
        end = os.lseek(self._fd, 0, os.SEEK_END)
        try:
            storage.write_all(self._fd, (line + "\n").encode("utf-8"))
            os.fsync(self._fd)
        except OSError as exc:
            try:
                os.ftruncate(self._fd, end)
                os.fsync(self._fd)
            except OSError:  # a torn last line is dropped when the journal is next opened
                pass
            raise storage.storage_error(exc, self.path) from None

    @property
    def written(self) -> int:
        """How many documents the journal holds (those of an earlier session included)."""
        return self._seq

    def close(self) -> None:
        """Close the file (every line is already on disk)."""
        if self._fd is not None:
            fd, self._fd = self._fd, None
            os.close(fd)

    def __enter__(self) -> "Journal":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


@dataclass(frozen=True)
class JournalRead:
    """The documents of a journal, and whether a torn last line was dropped.

    ``documents`` are the lines as parsed (what the chain hashes and the record is built from);
    ``models`` the same documents as their validated, frozen models
    (:mod:`verirun.record.documents`), for reading by attribute."""

    documents: list[dict]
    models: tuple[Document, ...] = ()
    torn_line: str | None = None

    @property
    def start(self) -> Start | None:
        """The start document, when the journal begins with one."""
        first = self.models[0] if self.models else None
        return first if isinstance(first, Start) else None


def read_journal(path: str | Path, *, models: bool = True) -> JournalRead:
    """Read a journal; a torn (unterminated, unparsable) last line is dropped and reported.

    Every line is validated against its kind's model once, here; the models are kept, unless
    ``models`` is false (for a reader of the parsed lines alone: each model is let go once it
    has checked its line, rather than a long run's thousands held at once).

    Raises
    ------
    RecordError
        If the file is missing or a line other than the last is not a JSON document, or not
        a document verirun writes.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RecordError(f"{path}: cannot read the journal: {exc.strerror or exc}") from None
    text = raw.decode("utf-8", errors="replace")
    lines = text.split("\n")
    torn = None
    if lines and lines[-1] == "":
        lines.pop()
    elif lines:
        # The last line has no newline: the write was cut. Keep it only if it is whole.
        try:
            json.loads(lines[-1])
        except ValueError:
            torn = lines.pop()
    docs, kept = [], []
    for number, line in enumerate(lines, start=1):
        try:
            doc = parse_json(line)
        except ValueError as exc:
            raise RecordError(f"{path}:{number}: not a journal document ({exc})") from None
        try:
            model = read_document(doc)
        except ValueError as exc:
            raise RecordError(
                f"{path}:{number}: not a journal document verirun writes: {exc}"
            ) from None
        if models:
            kept.append(model)
        docs.append(doc)
    return JournalRead(documents=docs, models=tuple(kept), torn_line=torn)


def read_start(path: str | Path) -> Start | None:
    """The start document of the journal at ``path``, from its first line alone (``None`` when
    the file cannot be read or does not begin with a start document verirun writes)."""
    try:
        with open(path, encoding="utf-8") as fh:
            first = read_document(parse_json(fh.readline()))
    except (OSError, ValueError):  # UnicodeDecodeError is a ValueError too
        return None
    return first if isinstance(first, Start) else None


def confirmed_steps(documents: Iterable[Document]) -> frozenset[int]:
    """Indexes of the steps with a confirmed entry: observed or skipped, and not withdrawn since."""
    done: set[int] = set()
    for doc in documents:
        if isinstance(doc, (Observation, Skip)):
            done.add(doc.index)
        elif isinstance(doc, Withdrawal):
            done.discard(doc.index)
    return frozenset(done)


def latest_time(documents: Iterable[Document]) -> str | None:
    """The latest time among ``documents`` (ISO 8601 UTC text sorts as time does)."""
    return max((doc.time for doc in documents), default=None)


def latest_environment(documents: Iterable[Document]) -> dict:
    """The conditions last journaled, as journaled: the start's, or the latest resume's that
    gave any (empty when none did)."""
    environment: dict = {}
    for doc in documents:
        if isinstance(doc, (Start, Resume)) and doc.environment is not None:
            given = as_journaled(doc.environment)
            if given or isinstance(doc, Start):
                environment = given
    return environment


def verify_chain(documents: Iterable[dict], source: str = "journal") -> list[str]:
    """Every break of the sequence or hash chain, one line each (empty when the chain is whole)."""
    problems = []
    prev, previous_kind = GENESIS, None
    for expected_seq, doc in enumerate(documents):
        if doc.get("seq") != expected_seq:
            problems.append(
                f"{source}: document {expected_seq + 1} has sequence number"
                f" {doc.get('seq')!r}, expected {expected_seq} (missing or reordered)"
            )
        if doc.get("prev") != prev:
            if expected_seq == 0:
                problems.append(
                    f"{source}: document 1 ({doc.get('kind')}) does not begin a journal"
                    " (the start is missing or was edited)"
                )
            else:
                problems.append(
                    f"{source}: the chain breaks between document {expected_seq}"
                    f" ({previous_kind}) and document {expected_seq + 1} ({doc.get('kind')}):"
                    " one was edited, or a document is missing or out of order"
                )
        prev = line_hash(dumps(doc))
        previous_kind = doc.get("kind")
    return problems


def json_number(value: float | None) -> float | None:
    """A float for JSON: infinities (an unbounded limit) become ``None``."""
    if value is None or (isinstance(value, float) and math.isinf(value)):
        return None
    return value


def write_record(record, path: str | Path) -> Path:
    """Write a run record (a dict as ``record.json`` holds it, or a
    :class:`~verirun.record.documents.Record`) atomically (temporary file, fsync, rename; see
    :mod:`verirun.storage`).

    Raises
    ------
    StorageError
        If it cannot be written; the previous record, if any, is kept and no temporary is left.
    """
    if not isinstance(record, dict):
        return storage.write_atomic(path, _model_pieces(record))
    return storage.write_atomic(path, _record_pieces(record))


def _model_pieces(record):
    """The canonical compact form of the typed ``record``, as :func:`_record_pieces` writes the
    dict :func:`~verirun.record.documents.record_document` makes of it, but made one part (and
    one row) at a time: the dict of a long run's whole record is never held beside its model."""
    from verirun.record.documents import part_document

    names = {
        field.alias or name: name
        for name, field in type(record).model_fields.items()
        if name in record.model_fields_set
    }
    entries = ((key, getattr(record, names[key])) for key in sorted(names))
    yield from _object_pieces(entries, part_document)


def _record_pieces(record: dict):
    """The canonical compact form of ``record``, a top-level entry (and a list item) at a time:
    one string of a long run's whole record would double its memory, and ``json.dump`` streams
    through the pure-Python encoder, several times slower than ``dumps``."""
    if not all(isinstance(key, str) for key in record):  # not a record verirun builds: in one piece
        yield dumps(record) + "\n"
        return
    yield from _object_pieces(((key, record[key]) for key in sorted(record)), lambda part: part)


def _object_pieces(entries, as_written):
    """A JSON object of ``entries`` (key, value; in key order) in canonical compact form, an entry
    (and a list item) at a time, each value or item as ``as_written`` makes it."""
    yield "{"
    for number, (key, value) in enumerate(entries):
        yield ("," if number else "") + dumps(key) + ":"
        if isinstance(value, list):
            yield "["
            for position, item in enumerate(value):
                yield ("," if position else "") + dumps(as_written(item))
            yield "]"
        else:
            yield dumps(as_written(value))
    yield "}\n"


def load_record(path: str | Path) -> Record:
    """Load a run record from its file or from its run folder, as a typed
    :class:`~verirun.record.documents.Record`.

    Raises
    ------
    RecordError
        If it is missing, not JSON, or not a run record this verirun reads (naming the field).
    """
    return read_record_file(path)[1]


def load_record_document(path: str | Path) -> dict:
    """Load a run record as the dict ``record.json`` holds, checked against the record's model
    as :func:`load_record` checks it: for comparing a stored record with one built again, key
    by key, and for tests of the file itself.

    Raises
    ------
    RecordError
        If it is missing, not JSON, or not a run record this verirun reads (naming the field).
    """
    return read_record_file(path)[0]


def read_record_file(path: str | Path) -> tuple[dict, Record]:
    """The record at ``path`` (its file or its run folder), as the dict it holds and as its
    :class:`~verirun.record.documents.Record`, checked once: for comparing it key by key with
    the record its journal closes into, and using it typed once it agrees.

    Raises
    ------
    RecordError
        If it is missing, not JSON, or not a run record this verirun reads (naming the field).
    """
    from pydantic import ValidationError

    from verirun.record.documents import validate_record, validation_text

    path = Path(path)
    if path.is_dir():
        path = path / RECORD_NAME
    try:
        record = parse_json(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise RecordError(
            f"{path}: no run record here (is the run finished? try 'verirun resume')"
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise RecordError(f"{path}: cannot read: {exc}") from None
    except ValueError as exc:
        raise RecordError(f"{path}: not a run record (not valid JSON: {exc})") from None
    if not isinstance(record, dict) or "record_format" not in record:
        raise RecordError(f"{path}: not a run record (no record_format)")
    if (
        not isinstance(record["record_format"], int)
        or isinstance(record["record_format"], bool)
        or record["record_format"] > RECORD_FORMAT
    ):
        raise RecordError(
            f"{path}: run record format {record['record_format']!r} is newer than this"
            f" verirun reads ({RECORD_FORMAT}); upgrade verirun"
        )
    try:
        model = validate_record(record)
    except ValidationError as exc:
        raise RecordError(
            f"{path}: not a run record verirun writes: {validation_text(exc)}"
        ) from None
    return record, model
