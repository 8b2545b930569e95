"""Outside the record package, journal documents and run records are read as typed models,
never by string key.

The record package (``verirun/record/``) reads a journal's lines as parsed (the chain is hashed
and the record built from them) and gives everything else the documents' frozen models
(:attr:`verirun.record.journal.JournalRead.models`, ``.start``), a few named questions
(:func:`~verirun.record.journal.confirmed_steps`, :func:`~verirun.record.journal.latest_time`...)
and the run record as its model (:func:`~verirun.record.journal.load_record`,
:func:`~verirun.record.verify.verified_record`, :func:`~verirun.record.build.build_record`,
:func:`~verirun.record.build.close_record`). New documents are made by
:func:`verirun.record.documents.compose`. The scan below holds the rest of the package to that;
its self-tests feed it the string-keyed reads the package used to make.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from verirun.record.documents import KINDS

PACKAGE = Path(__file__).resolve().parents[2] / "verirun"
RECORD = PACKAGE / "record"

#: Calls and attributes whose value is a journal's parsed lines (dicts), or one of them, or a
#: run record (as the file holds it, or as the model every reader outside the package gets).
_SOURCES = {
    "read_journal",
    "documents",
    "read_start",
    "load_record",
    "load_record_document",
    "verified_record",
    "verified_records",
    "build_record",
    "build_record_document",
    "close_record",
}
#: The names documents and records go by in this code base, whatever they were bound from.
_DOCUMENT_NAMES = {"doc", "docs", "documents", "journal_docs", "start", "resume", "record"}


def _is_source(node: ast.AST, tainted: set[str]) -> bool:
    """Whether ``node`` evaluates to a journal read, its documents or one of them."""
    if isinstance(node, ast.Name):
        return node.id in tainted or node.id in _DOCUMENT_NAMES
    if isinstance(node, ast.Call):
        func = node.func
        name = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", None)
        if name in _SOURCES:
            return True
        if name in ("list", "reversed", "enumerate", "next", "iter", "tuple", "sorted"):
            return any(_is_source(arg, tainted) for arg in node.args)
        return False
    if isinstance(node, ast.Attribute):
        # .documents of a journal read (not a table's column, such as runs.c.documents)
        return node.attr == "documents" and _is_source(node.value, tainted)
    if isinstance(node, ast.Subscript):
        return _is_source(node.value, tainted)
    if isinstance(node, ast.GeneratorExp | ast.ListComp):
        return any(_is_source(gen.iter, tainted) for gen in node.generators)
    return False


def _targets(node: ast.AST) -> list[str]:
    if isinstance(node, ast.Name):
        return [node.id]
    if isinstance(node, ast.Tuple | ast.List):
        return [name for element in node.elts for name in _targets(element)]
    if isinstance(node, ast.Starred):
        return _targets(node.value)
    return []


def _tainted_names(scope: ast.AST) -> set[str]:
    """Names in ``scope`` bound, directly or through loops and assignments, to journal
    documents as parsed (to a fixed point, so the order of the statements does not matter)."""
    tainted: set[str] = set()
    while True:
        before = len(tainted)
        for node in ast.walk(scope):
            if isinstance(node, ast.Assign) and _is_source(node.value, tainted):
                for target in node.targets:
                    tainted.update(_targets(target))
            elif isinstance(node, ast.AnnAssign | ast.NamedExpr) and node.value is not None:
                if _is_source(node.value, tainted):
                    tainted.update(_targets(node.target))
            elif isinstance(node, ast.For | ast.comprehension) and _is_source(node.iter, tainted):
                tainted.update(_targets(node.target))
            elif isinstance(node, ast.withitem) and node.optional_vars is not None:
                if _is_source(node.context_expr, tainted):
                    tainted.update(_targets(node.optional_vars))
        if len(tainted) == before:
            return tainted


def _string_key(node: ast.AST) -> str | None:
    """The string key ``node`` reads (``x["key"]`` or ``x.get("key"...)``), if it reads one."""
    if isinstance(node, ast.Subscript):
        key = node.slice
        if isinstance(key, ast.Constant) and isinstance(key.value, str):
            return key.value
    if (
        isinstance(node, ast.Call)
        and isinstance(node.func, ast.Attribute)
        and node.func.attr == "get"
        and node.args
        and isinstance(node.args[0], ast.Constant)
        and isinstance(node.args[0].value, str)
    ):
        return node.args[0].value
    return None


def _read_on(node: ast.AST) -> ast.AST:
    """What a string-keyed read reads from (``x`` in ``x["a"]`` and ``x.get("a")``)."""
    return node.value if isinstance(node, ast.Subscript) else node.func.value


def _names_a_kind(node: ast.AST, constants: dict[str, object]) -> bool:
    """Whether ``node`` is a document kind, or holds one: a string, a module's constant
    (``NUMBER_KIND = "certificate-number"``), a tuple of them."""
    if isinstance(node, ast.Constant):
        return node.value in KINDS
    if isinstance(node, ast.Name):
        return constants.get(node.id) in KINDS
    if isinstance(node, ast.Tuple | ast.List | ast.Set):
        return any(_names_a_kind(element, constants) for element in node.elts)
    return False


def _constants(tree: ast.Module) -> dict[str, object]:
    """The module's top-level names bound to a constant."""
    return {
        target.id: node.value.value
        for node in tree.body
        if isinstance(node, ast.Assign) and isinstance(node.value, ast.Constant)
        for target in node.targets
        if isinstance(target, ast.Name)
    }


def keyed_reads(source: str, filename: str = "<source>") -> list[str]:
    """Every place in ``source`` that reads a journal document by a string key, as far as this
    simple static check can tell, one ``file:line: what`` each.

    Three things are found:

    - a string-keyed read (``x["k"]``, ``x.get("k")``, chained as deep as it goes) of a value
      bound from a journal read: ``read_journal(...)``, its ``.documents``, ``read_start(...)``,
      an item of them or a loop variable over them, or a name documents go by here
      (``doc``, ``docs``, ``documents``, ``start``, ``resume``...);
    - anywhere, a ``["kind"]`` or ``.get("kind")`` compared with a document kind
      (``x["kind"] == "resume"``, ``x.get("kind") in ("correction", "as-found")``);
    - anywhere, a document composed as a dict literal: a ``"kind"`` key whose value is a
      document kind, or a module constant holding one (documents are made by ``compose``).

    Its limits: it follows names within one function (or the module's top level), not into the
    functions a document is handed to under another name; a read through ``getattr``,
    ``operator.itemgetter``, ``**`` unpacking or a key held in a variable is not seen; a dict
    that is not a document but is bound from a journal read, or named like one, is reported.
    """
    tree = ast.parse(source, filename)
    constants = _constants(tree)
    found: list[str] = []
    scopes = [tree] + [
        node
        for node in ast.walk(tree)
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda)
    ]
    for scope in scopes:
        tainted = _tainted_names(scope)
        for node in ast.walk(scope):
            key = _string_key(node)
            if key is not None and _is_source(_read_on(node), tainted):
                found.append(f"{filename}:{node.lineno}: reads a document's {key!r} by key")
    for node in ast.walk(tree):
        if isinstance(node, ast.Compare) and _string_key(node.left) == "kind":
            if any(_names_a_kind(other, constants) for other in node.comparators):
                found.append(f"{filename}:{node.lineno}: tells a document's kind by key")
        if isinstance(node, ast.Dict):
            for key, value in zip(node.keys, node.values):
                if (
                    isinstance(key, ast.Constant)
                    and key.value == "kind"
                    and _names_a_kind(value, constants)
                ):
                    found.append(f"{filename}:{node.lineno}: composes a document as a dict")
    return sorted(set(found), key=lambda line: (line.split(":")[0], int(line.split(":")[1])))


def _outside_modules() -> list[Path]:
    return sorted(p for p in PACKAGE.rglob("*.py") if RECORD not in p.parents)


class TestTheScan:
    """The scan finds the reads this code base used to make (each snippet is one it held)."""

    @pytest.mark.parametrize(
        "snippet",
        [
            # a start document's parts by key, and its kind told by key
            "def f(run_dir):\n"
            "    docs = read_journal(run_dir / JOURNAL_NAME).documents\n"
            "    if not docs or docs[0].get('kind') != 'start':\n"
            "        raise RecordError('no start')\n"
            "    start = docs[0]\n"
            "    return start['procedure']['text']\n",
            # through a journal read's attribute, a loop and enumerate
            "def f(folder):\n"
            "    read = read_journal(folder)\n"
            "    for position, entry in enumerate(read.documents):\n"
            "        if entry.get('revision') == 2:\n"
            "            return position\n",
            # a list of documents handed in under the name documents go by
            "def latest_time(documents):\n    return max(d['time'] for d in documents)\n",
            # the first line of a journal, read on its own
            "def f(journal):\n    start = read_start(journal)\n    return start.get('as_found')\n",
            # a kind told by key on a value of any name
            "def f(item):\n    return item['kind'] in ('correction', 'as-found')\n",
            # a document composed as a dict, its kind spelled or held in a constant
            "def f(journal, now):\n"
            "    journal.append({'kind': 'issue', 'time': now, 'by': 'A. Person'})\n",
            "NUMBER_KIND = 'certificate-number'\n"
            "def f(journal, now):\n"
            "    journal.append({'kind': NUMBER_KIND, 'time': now, 'number': 'N-1'})\n",
            # the start document a resume is given, by its parameter's name
            "def f(identity, resume):\n"
            "    return identity == resume['bench']['calibrator']['identity']\n",
            # a journal's first line, parsed by hand
            "def f(fh, uid):\n"
            "    start = json.loads(fh.readline())\n"
            "    return (start.get('as_found') or {}).get('run') == uid\n",
        ],
    )
    def test_a_read_by_key_is_found(self, snippet):
        assert keyed_reads(snippet)

    @pytest.mark.parametrize(
        "snippet",
        [
            # a record as its file holds it, read by key (the code base did, before records
            # were typed outside the package)
            "def f(run_dir):\n"
            "    record = load_record(run_dir)\n"
            "    return record['run']['status'] != 'complete'\n",
            "def f(folder):\n"
            "    found = verified_record(folder)\n"
            "    return found['summary'].get('overall')\n",
            "def f(docs):\n    return build_record(docs)['points'][0]['verdict']\n",
            "def f(record):\n    return record['bench'].get('simulated')\n",
        ],
    )
    def test_a_record_read_by_key_is_found(self, snippet):
        assert keyed_reads(snippet)

    def test_typed_documents_and_records_are_not_reads_by_key(self):
        """Typed documents and records, and the register's columns named ``documents``, are no
        string-keyed reads."""
        snippet = (
            "def f(run_dir, runs):\n"
            "    record = load_record(run_dir)\n"
            "    read = read_journal(run_dir / JOURNAL_NAME)\n"
            "    start = read.start\n"
            "    latest = sa.select(sa.func.max(runs.c.documents).label('latest'))\n"
            "    rows = {'kind': 'standard', 'id': record.run.uid}\n"
            "    return start.procedure.text, record.summary.overall, latest, rows\n"
        )
        assert keyed_reads(snippet) == []


def test_no_module_outside_the_record_package_reads_a_document_or_record_by_key():
    """Every module of verirun outside verirun/record/ is scanned (there are some: the scan is
    not of an empty list)."""
    modules = _outside_modules()
    assert len(modules) > 20 and PACKAGE / "conduct.py" in modules
    found = [
        line
        for path in modules
        for line in keyed_reads(path.read_text(encoding="utf-8"), str(path.relative_to(PACKAGE)))
    ]
    assert found == []
