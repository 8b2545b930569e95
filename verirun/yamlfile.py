"""Read YAML files strictly and report every problem as ``file:line: field: message``.

PyYAML's node tree keeps the line of every key; we keep a map from each value's path
(``("ranges", 2, "points")``) to the line where it is written, refuse duplicate keys (which
plain YAML loading silently overwrites), and turn pydantic validation errors into lines a person
can act on.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, TypeVar

import yaml

from verirun.errors import ProcedureError
from verirun.text import LAYOUT, refusal

Path_ = tuple[Any, ...]
M = TypeVar("M")


class LocatedData:
    """Data loaded from a YAML file, with the line of every value it holds."""

    def __init__(self, data: Any, lines: dict[Path_, int], source: str, text: str):
        self.data = data
        self.lines = lines
        self.source = source
        self.text = text

    def line_of(self, loc: Path_) -> int:
        """Line of the deepest value along ``loc`` that exists in the file (1 if none).

        Elements of ``loc`` that are not in the file (a union member's tag, a model name) are
        skipped, so pydantic's locations find their line.
        """
        best = self.lines.get((), 1)
        path: Path_ = ()
        for part in loc:
            candidate = path + (part,)
            if candidate in self.lines:
                path = candidate
                best = self.lines[candidate]
        return best

    def problem(self, loc: Path_, message: str, *, missing: bool = False) -> str:
        """Format one problem as ``file:line: field: message``.

        With ``missing``, the last part of ``loc`` names a key that is not in the file: it is
        kept in the field so the message says which key to add.
        """
        field = format_loc(loc[:-1] if missing else loc, self)
        if missing and loc and isinstance(loc[-1], str):
            field = f"{field}.{loc[-1]}" if field else loc[-1]
        where = f"{self.source}:{self.line_of(loc)}"
        return f"{where}: {field}: {message}" if field else f"{where}: {message}"


def format_loc(loc: Path_, located: LocatedData | None = None) -> str:
    """``("ranges", 2, "points")`` -> ``"ranges[3].points"``, keeping only parts in the file.

    Items of a list are counted from 1 (``ranges[1]`` is the first range), as steps are.

    A key that is not plain letters, digits, '-', '_' or '.' is shown quoted, so that a key
    holding a newline or a colon cannot make the message misleading.
    """
    text = ""
    path: Path_ = ()
    for part in loc:
        candidate = path + (part,)
        if located is not None and candidate not in located.lines:
            continue
        path = candidate
        if isinstance(part, int):
            text += f"[{part + 1}]"  # counted from 1, as people count items of a list
        else:
            name = str(part) if _PLAIN_KEY.fullmatch(str(part)) else repr(str(part))
            text += f".{name}" if text else name
    return text


_PLAIN_KEY = re.compile(r"^[A-Za-z0-9_.-]+$")

#: The most nodes a file may hold (aliases counted each time they are used): a guard against a
#: few lines of aliases that expand to millions of values.
MAX_NODES = 200_000


class _Loader(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):
    """The safe loader, with every error building a value reported at that value's line."""

    def construct_object(self, node, deep=False):
        try:
            return super().construct_object(node, deep)
        except yaml.MarkedYAMLError:
            raise
        except Exception as exc:  # a tag that does not fit its text, an impossible date ...
            tag = node.tag.rsplit(":", 1)[-1]
            value = node.value if isinstance(node, yaml.ScalarNode) else "this value"
            why = f": {exc}" if isinstance(exc, ValueError) else ""
            raise yaml.constructor.ConstructorError(
                None, None, f"{value!r} cannot be read as a {tag}{why}", node.start_mark
            ) from None


def _has_surrogate(text: str) -> bool:
    return any("\ud800" <= c <= "\udfff" for c in text)


def _walk(
    node: yaml.Node,
    path: Path_,
    lines: dict[Path_, int],
    problems: list[tuple[Path_, int, str]],
    ancestors: set[int],
    count: list[int],
) -> None:
    count[0] += 1
    if count[0] > MAX_NODES:
        if count[0] == MAX_NODES + 1:
            problems.append(
                (
                    path,
                    node.start_mark.line + 1,
                    f"the file holds more than {MAX_NODES} values (aliases expanding?)",
                )
            )
        return
    lines.setdefault(path, node.start_mark.line + 1)
    if id(node) in ancestors:
        problems.append((path, node.start_mark.line + 1, "an alias refers back to its own value"))
        return
    if isinstance(node, yaml.ScalarNode):
        if _has_surrogate(node.value):
            problems.append(
                (
                    path,
                    node.start_mark.line + 1,
                    "holds a character that is not valid text"
                    " (a lone surrogate); write the text again",
                )
            )
        elif (why := refusal(node.value, allow=LAYOUT)) is not None:
            problems.append((path, node.start_mark.line + 1, why))
        return
    ancestors = ancestors | {id(node)}
    if isinstance(node, yaml.MappingNode):
        seen: dict[Any, int] = {}
        for key_node, value_node in node.value:
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
            line = key_node.start_mark.line + 1
            if key in seen:
                problems.append(
                    (path + (key,), line, f"duplicate key (first given on line {seen[key]})")
                )
                continue
            seen[key] = line
            lines[path + (key,)] = line
            if (
                isinstance(key, str)
                and not _has_surrogate(key)
                and (why := refusal(key)) is not None
            ):
                problems.append((path + (key,), line, f"the key {why}"))
            _walk(value_node, path + (key,), lines, problems, ancestors, count)
    elif isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            lines[path + (index,)] = item.start_mark.line + 1
            _walk(item, path + (index,), lines, problems, ancestors, count)


def load_text(text: str, source: str) -> LocatedData:
    """Parse YAML ``text`` (named ``source`` in messages) into :class:`LocatedData`.

    Raises
    ------
    ProcedureError
        On a YAML syntax error, a character YAML refuses, a value that cannot be read as its
        tag says, an alias that refers to itself, or duplicate keys, with ``file:line`` for each.
    """
    loader = _Loader(text)
    try:
        try:
            node = loader.get_single_node()
        except yaml.reader.ReaderError as exc:
            line = text.count("\n", 0, exc.position) + 1
            char = (
                exc.character
                if isinstance(exc.character, int)
                else ord(str(exc.character)[:1] or "\0")
            )
            raise ProcedureError(
                f"{source}:{line}: a character YAML does not allow (U+{char:04X}); remove it"
            ) from None
        except yaml.MarkedYAMLError as exc:
            raise ProcedureError(_marked(exc, source)) from None
        except (yaml.YAMLError, RecursionError) as exc:
            raise ProcedureError(f"{source}:1: not valid YAML: {_first_line(exc)}") from None
        lines: dict[Path_, int] = {}
        problems: list[tuple[Path_, int, str]] = []
        if node is not None:
            _walk(node, (), lines, problems, set(), [0])
        if problems:
            raise ProcedureError(
                [
                    f"{source}:{line}: {format_loc(loc)}: {msg}"
                    if format_loc(loc)
                    else f"{source}:{line}: {msg}"
                    for loc, line, msg in problems
                ]
            )
        try:
            # Built from the node tree already composed and checked: no second parse.
            data = loader.construct_document(node) if node is not None else None
        except yaml.MarkedYAMLError as exc:
            raise ProcedureError(_marked(exc, source)) from None
        except (yaml.YAMLError, RecursionError) as exc:
            raise ProcedureError(f"{source}:1: not valid YAML: {_first_line(exc)}") from None
    finally:
        loader.dispose()
    return LocatedData(data, lines, source, text)


def _marked(exc: yaml.MarkedYAMLError, source: str) -> str:
    mark = exc.problem_mark or exc.context_mark
    line = mark.line + 1 if mark is not None else 1
    what = "not valid YAML: " if not isinstance(exc, yaml.constructor.ConstructorError) else ""
    return f"{source}:{line}: {what}{_first_line(exc.problem or exc)}"


def _first_line(exc) -> str:
    return str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__


def load_file(path: str | Path) -> LocatedData:
    """Read and parse a YAML file; a missing, unreadable or non-UTF-8 file is a
    :class:`ProcedureError`."""
    return load_text(read_text(path), str(path))


def read_text(path: str | Path) -> str:
    """The text of a YAML file (a leading byte-order mark dropped); a missing, unreadable or
    non-UTF-8 file is a :class:`ProcedureError`."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ProcedureError(f"{path}:1: no such file") from None
    except IsADirectoryError:
        raise ProcedureError(f"{path}:1: is a folder, not a file") from None
    except OSError as exc:
        raise ProcedureError(f"{path}:1: cannot read: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        raise ProcedureError(
            f"{path}:{line}: not UTF-8 text (byte 0x{raw[exc.start]:02x}); save the file as UTF-8"
        ) from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return text


def validate(model: type[M], located: LocatedData, *, context: dict | None = None) -> M:
    """Validate ``located.data`` against a pydantic ``model``; every error becomes one line.

    Raises
    ------
    ProcedureError
        Listing every problem found, each as ``file:line: field: message``.
    """
    from pydantic import ValidationError

    if not isinstance(located.data, dict):
        raise ProcedureError(
            f"{located.source}:1: expected a mapping of keys at the top of the file"
        )
    try:
        return model.model_validate(located.data, context=context)  # type: ignore[attr-defined]
    except ValidationError as exc:
        problems = []
        for err in exc.errors(include_url=False):
            message = err["msg"]
            if message.startswith("Value error, "):
                message = message[len("Value error, ") :]
            if err["type"] == "extra_forbidden":
                message = "unknown key (check its spelling)"
            elif err["type"] == "missing":
                message = "required, but missing"
            problems.append(
                located.problem(tuple(err["loc"]), message, missing=err["type"] == "missing")
            )
        raise ProcedureError(_unique(problems)) from None


def _unique(items: list[str]) -> list[str]:
    seen: set[str] = set()
    return [x for x in items if not (x in seen or seen.add(x))]


def check_format(located: LocatedData, supported: int, kind: str) -> None:
    """Refuse a file whose ``format`` version is missing, not an integer or newer than we read."""
    data = located.data if isinstance(located.data, dict) else {}
    version = data.get("format")
    if version is None:
        raise ProcedureError(
            located.problem(
                ("format",),
                f"required: the {kind} format version (this verirun reads format {supported})",
            )
        )
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise ProcedureError(
            located.problem(("format",), f"must be a whole number, got {version!r}")
        )
    if version > supported:
        raise ProcedureError(
            located.problem(
                ("format",),
                f"this {kind} is format {version}, newer than"
                f" this verirun reads (format {supported}); upgrade verirun",
            )
        )
