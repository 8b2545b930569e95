"""Hostile input for every file loader: it loads, or it says file:line: what is wrong.

Five loaders read YAML a person writes: procedures, bench files, driver profiles, lab profiles
and virtual meters. Whatever the bytes on disk, each must either load or raise
:class:`~verirun.errors.ProcedureError` whose every line starts ``<file>:<line>: ``; any other
exception is a bug (principle 7 of the design: tracebacks are bugs). Three families of input:

(a) random YAML documents (nested dicts, lists and scalars: huge ints, inf and nan, booleans,
    None, unicode, dates);
(b) mutations of the good packaged files, made on the YAML node tree so that even a duplicated
    key or a cyclic alias can be written out;
(c) random bytes, text with characters YAML refuses, invalid UTF-8 and truncated files.

``verirun check`` is also run in-process on mutated procedures: exit 0 or 1, never a traceback
or an "internal error".

Examples are derandomized so that the run is the same every time (the expected failures below
stay expected); set ``VERIRUN_FUZZ_EXAMPLES=<n>`` to explore with n random examples per test,
shrinking included. The number of cases each strategy ran is printed at the end of the module.
"""

from __future__ import annotations

import contextlib
import io
import math
import os
import re
from collections import Counter
from importlib.resources import files
from pathlib import Path

import pytest
import yaml
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st
from yaml.representer import SafeRepresenter

from verirun.bench.config import load_bench
from verirun.bench.profile import load_profile
from verirun.cli import main
from verirun.errors import ProcedureError
from verirun.lab import load_lab
from verirun.procedure.load import load_procedure
from verirun.readings import VirtualMeter

# --- settings -------------------------------------------------------------------------------

_EXPLORE = int(os.environ.get("VERIRUN_FUZZ_EXAMPLES", "0") or 0)
_COMMON = dict(
    deadline=None,
    database=None,
    report_multiple_bugs=False,
    suppress_health_check=[
        HealthCheck.too_slow,
        HealthCheck.data_too_large,
        HealthCheck.filter_too_much,
        HealthCheck.large_base_example,
    ],
)
if _EXPLORE:
    FUZZ = settings(max_examples=_EXPLORE, **_COMMON)
else:
    # The known failures are reproduced minimally in TestMinimalReproductions, so the fixed run
    # skips shrinking: it would only spend the time budget re-deriving them.
    FUZZ = settings(
        max_examples=8, derandomize=True, phases=[Phase.explicit, Phase.generate], **_COMMON
    )
FUZZ_CLI = settings(FUZZ, max_examples=_EXPLORE or 5)

# --- the loaders and their good files -------------------------------------------------------

DEMO = files("verirun.demo")
GOOD_FILES = {
    "procedure": DEMO / "qm40-analog-multimeter.yaml",
    "bench": DEMO / "bench-sim.yaml",
    "profile": files("verirun.bench") / "profiles" / "scpi-generic.yaml",
    "lab": DEMO / "lab.yaml",
    "virtual-meter": DEMO / "virtual-meter.yaml",
}
LOADERS = {
    "procedure": load_procedure,
    "bench": load_bench,
    "profile": load_profile,  # a path ending in .yaml is read as a file, not a packaged name
    "lab": load_lab,
    "virtual-meter": VirtualMeter,
}
TOP_KEYS = {
    "procedure": ["format", "procedure", "meter", "decision", "ranges"],
    "bench": ["format", "bench", "calibrator", "settle", "safety"],
    "profile": [
        "format",
        "name",
        "description",
        "link",
        "commands",
        "output-state",
        "error-queue",
        "functions",
    ],
    "lab": ["format", "lab"],
    "virtual-meter": ["format", "meter", "ranges"],
}
GOOD_TEXT = {name: ref.read_text(encoding="utf-8") for name, ref in GOOD_FILES.items()}
GOOD_NODES = {name: yaml.compose(text, Loader=yaml.SafeLoader) for name, text in GOOD_TEXT.items()}
NAMES = list(LOADERS)

#: Cases run, by (loader, strategy); printed at the end of the module.
COUNTS: Counter = Counter()


@pytest.fixture(scope="module", autouse=True)
def report_counts(request):
    """Print how many cases each strategy ran, once the module is done."""
    yield
    if not COUNTS:
        return
    by_strategy: Counter = Counter()
    for (_, strategy), n in COUNTS.items():
        by_strategy[strategy] += n
    lines = ["", f"fuzz cases run: {sum(COUNTS.values())} in all"]
    for strategy, n in sorted(by_strategy.items()):
        per_loader = ", ".join(
            f"{name} {COUNTS[(name, strategy)]}"
            for name in NAMES + ["check-cli"]
            if COUNTS[(name, strategy)]
        )
        lines.append(f"  {strategy:<30} {n:>5}  ({per_loader})")
    capture = request.config.pluginmanager.get_plugin("capturemanager")
    with capture.global_and_fixture_disabled() if capture else contextlib.nullcontext():
        print("\n".join(lines), flush=True)


@pytest.fixture(scope="module")
def workdir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("fuzz")


def write_case(workdir: Path, name: str, strategy: str, data: bytes) -> Path:
    path = workdir / f"{name}-{strategy}.yaml"
    path.write_bytes(data)
    COUNTS[(name, strategy)] += 1
    return path


def load(name: str, path: Path):
    """Load ``path`` with loader ``name``.

    A RecursionError is re-raised without its thousand frames: reporting them costs pytest
    seconds per test, and they say nothing the message does not.
    """
    try:
        return LOADERS[name](path)
    except RecursionError as exc:
        raise exc.with_traceback(None) from None


def assert_loads_or_reports(name: str, path: Path) -> None:
    """Load ``path`` with loader ``name``: success, or a ProcedureError of file:line lines only.

    Any other exception propagates, failing the test with its own type.
    """
    try:
        load(name, path)
    except ProcedureError as exc:
        prefix = re.compile(rf"{re.escape(str(path))}:\d+: ")
        assert exc.problems, "a ProcedureError with no problem in it"
        lines = [line for problem in exc.problems for line in re.split(r"[\r\n]", problem)]
        bad = [line for line in lines if not prefix.match(line)]
        assert not bad, f"lines without {path.name}:<line>: prefix: {[b[:160] for b in bad[:3]]}"


# --- (a) random YAML documents --------------------------------------------------------------

SCALARS = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.integers(min_value=-(10**600), max_value=10**600),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([math.inf, -math.inf, math.nan, 1e308, -1e308, 5e-324, 0.0, -0.0]),
    st.text(max_size=30),
    st.sampled_from(
        ["10 V", "-1 V", "1e400 V", "nan", "NaN V", "inf", "Ω", "2099-12-31", "ON", "off"]
    ),
    st.dates(),
    st.datetimes(),
)
# Keys with line breaks or control characters are left to the unknown-key-control-char mutation,
# which expects them to fail today; here they would only hide every other finding behind it.
KEY_TEXT = st.text(
    st.characters(blacklist_categories=("Cs", "Cc", "Zl", "Zp"), blacklist_characters="\x85"),
    max_size=12,
)
KEYS = st.one_of(KEY_TEXT, st.integers(), st.booleans(), st.none(), st.dates())
VALUES = st.recursive(
    SCALARS,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(KEYS, inner, max_size=4)),
    max_leaves=25,
)


def random_document(name: str):
    known = st.sampled_from(TOP_KEYS[name])
    return st.one_of(
        VALUES,
        st.dictionaries(st.one_of(known, KEY_TEXT), VALUES, max_size=6),
        st.fixed_dictionaries(
            {"format": st.sampled_from([1, 1.0, "1", 2, 0, -1, 10**400, True])},
            optional={key: VALUES for key in TOP_KEYS[name] if key != "format"},
        ),
    )


def dump(doc, flow, unicode) -> bytes:
    return yaml.safe_dump(
        doc, allow_unicode=unicode, default_flow_style=flow, sort_keys=False
    ).encode("utf-8")


class TestRandomDocuments:
    @pytest.mark.parametrize("name", NAMES)
    @FUZZ
    @given(data=st.data())
    def test_random_document_loads_or_is_reported(self, name, data, workdir):
        """A random YAML document either loads or is refused with file:line problems only."""
        doc = data.draw(random_document(name), label="document")
        text = dump(doc, data.draw(st.sampled_from([None, False, True])), data.draw(st.booleans()))
        assert_loads_or_reports(name, write_case(workdir, name, "a:random-document", text))


# --- (b) mutations of the good files --------------------------------------------------------

STR = "tag:yaml.org,2002:str"
_RESOLVER = yaml.resolver.Resolver()
NUMERIC = re.compile(r"^[-+]?\.?\d")


def clone(node: yaml.Node) -> yaml.Node:
    """A copy of a node tree (marks shared: they are only read)."""
    if isinstance(node, yaml.ScalarNode):
        return yaml.ScalarNode(node.tag, node.value, node.start_mark, node.end_mark, node.style)
    if isinstance(node, yaml.SequenceNode):
        return yaml.SequenceNode(
            node.tag,
            [clone(n) for n in node.value],
            node.start_mark,
            node.end_mark,
            node.flow_style,
        )
    return yaml.MappingNode(
        node.tag,
        [(clone(k), clone(v)) for k, v in node.value],
        node.start_mark,
        node.end_mark,
        node.flow_style,
    )


def make_node(value) -> yaml.Node:
    if isinstance(value, yaml.Node):
        return value
    return SafeRepresenter().represent_data(value)


class Tree:
    """A mutable copy of a good file's node tree, with every value slot listed."""

    def __init__(self, name: str):
        self.root = clone(GOOD_NODES[name])
        self.refresh()

    def refresh(self) -> None:
        """List the value slots again, after a mutation moved them."""
        self.slots: list[tuple[yaml.Node, int, tuple]] = []  # (container, position, path)
        self._walk(self.root, (), set())

    def _walk(self, node, path, seen):
        if id(node) in seen:  # a cyclic alias made by a mutation
            return
        seen.add(id(node))
        if isinstance(node, yaml.MappingNode):
            for i, (key, value) in enumerate(node.value):
                self.slots.append((node, i, path + (key.value,)))
                self._walk(value, path + (key.value,), seen)
        elif isinstance(node, yaml.SequenceNode):
            for i, value in enumerate(node.value):
                self.slots.append((node, i, path + (i,)))
                self._walk(value, path + (i,), seen)

    @staticmethod
    def get(container, i):
        return (
            container.value[i][1] if isinstance(container, yaml.MappingNode) else container.value[i]
        )

    @staticmethod
    def put(container, i, node):
        if isinstance(container, yaml.MappingNode):
            container.value[i] = (container.value[i][0], node)
        else:
            container.value[i] = node

    def where(self, kind=None, numeric=False):
        found = [
            s
            for s in self.slots
            if (kind is None or isinstance(self.get(s[0], s[1]), kind))
            and (not numeric or NUMERIC.match(self.get(s[0], s[1]).value or ""))
        ]
        return found

    def mappings(self):
        return [self.root] + [self.get(c, i) for c, i, _ in self.where(yaml.MappingNode)]

    def sequences(self):
        return [self.get(c, i) for c, i, _ in self.where(yaml.SequenceNode)]

    def text(self) -> bytes:
        return yaml.serialize(self.root, Dumper=yaml.SafeDumper, allow_unicode=True).encode("utf-8")


def _scalar_slot(draw, tree, numeric=False):
    slots = tree.where(yaml.ScalarNode, numeric=numeric) or tree.where(yaml.ScalarNode)
    return draw(st.sampled_from(slots))


def m_drop_key(draw, tree):
    container, i, path = draw(
        st.sampled_from([s for s in tree.slots if isinstance(s[0], yaml.MappingNode)])
    )
    del container.value[i]
    return f"drop {path}"


def m_duplicate_key(draw, tree):
    container, i, path = draw(
        st.sampled_from([s for s in tree.slots if isinstance(s[0], yaml.MappingNode)])
    )
    key, value = container.value[i]
    again = clone(value) if draw(st.booleans()) else make_node(draw(SCALARS))
    container.value.insert(draw(st.integers(i + 1, len(container.value))), (clone(key), again))
    return f"duplicate {path}"


PLAIN_KEYS = st.from_regex(r"[a-z][a-z0-9_-]{0,20}", fullmatch=True)
CONTROL_KEYS = st.builds(
    lambda a, c, b: a + c + b,
    st.text("abc", max_size=4),
    st.sampled_from(["\n", "\r", "\r\n", "\t", "\x1b[2J", "\x07", "\x85", "\u2028"]),
    st.text("xyz", max_size=4),
)


def _add_key(draw, tree, keys):
    mapping = draw(st.sampled_from(tree.mappings()))
    key = draw(keys)
    mapping.value.append((yaml.ScalarNode(STR, key), make_node(draw(SCALARS))))
    return f"add key {key!r}"


def m_unknown_key(draw, tree):
    return _add_key(draw, tree, PLAIN_KEYS)


def m_unknown_key_control(draw, tree):
    return _add_key(draw, tree, CONTROL_KEYS)


def m_wrong_type(draw, tree):
    container, i, path = draw(st.sampled_from(tree.slots))
    old = tree.get(container, i)
    choices = [
        yaml.SequenceNode("tag:yaml.org,2002:seq", [make_node(draw(SCALARS))]),
        yaml.MappingNode("tag:yaml.org,2002:map", [(yaml.ScalarNode(STR, "x"), make_node(1))]),
        make_node(draw(st.sampled_from([True, False, None, 0, "text", 2.5]))),
    ]
    new = draw(st.sampled_from([c for c in choices if type(c) is not type(old)] or choices))
    tree.put(container, i, new)
    return f"wrong type at {path}"


def _replace_scalar(values, numeric=True):
    def mutate(draw, tree):
        container, i, path = _scalar_slot(draw, tree, numeric=numeric)
        value = draw(values)
        tree.put(container, i, make_node(value))
        return f"{path} = {str(value)[:40]!r}"

    return mutate


m_nan = _replace_scalar(st.sampled_from([math.nan, "nan", "NaN V", ".nan"]))
m_huge_float = _replace_scalar(
    st.sampled_from(
        [1e308, -1e308, 1.7976931348623157e308, math.inf, -math.inf, "1e308", "1e308 V", "1e400 V"]
    )
)
m_minus_one = _replace_scalar(
    st.sampled_from([-1, -1.0, "-1", "-1 V", "-1 A", "-1 ohm", "-1 s", "-1 deg"])
)
m_huge_int = _replace_scalar(
    st.builds(lambda e, s: s * 10**e, st.integers(19, 4000), st.sampled_from([1, -1]))
)
m_long_string = _replace_scalar(
    st.builds(
        lambda t, n: (t or "x") * n, st.text(min_size=1, max_size=5), st.integers(1_000, 4_000)
    ),
    numeric=False,
)
m_lone_surrogate = _replace_scalar(
    st.sampled_from(["\ud800", "TH\udfffX", "10 \udc80V"]), numeric=False
)


def m_negative_span(draw, tree):
    slots = [
        s
        for s in tree.where(yaml.ScalarNode, numeric=True)
        if not tree.get(s[0], s[1]).value.startswith(("-", "+"))
    ] or tree.where(yaml.ScalarNode)
    container, i, path = draw(st.sampled_from(slots))
    node = tree.get(container, i)
    value = "-" + node.value
    # The tag YAML would give the new text (a negated date is no longer a date), so the file
    # written out holds no explicit tag: those are the explicit-tag mutation's business.
    tag = _RESOLVER.resolve(yaml.ScalarNode, value, (True, False))
    tree.put(container, i, yaml.ScalarNode(tag, value, style=node.style))
    # Also swap a min/max pair sometimes, for profiles, whose spans are two numbers.
    for mapping in tree.mappings():
        keys = {k.value: n for n, (k, _) in enumerate(mapping.value)}
        if {"min", "max"} <= keys.keys() and draw(st.booleans()):
            lo, hi = keys["min"], keys["max"]
            mapping.value[lo], mapping.value[hi] = (
                (mapping.value[lo][0], mapping.value[hi][1]),
                (mapping.value[hi][0], mapping.value[lo][1]),
            )
            break
    return f"negate {path}"


def m_empty_list(draw, tree):
    slots = tree.where(yaml.SequenceNode) if draw(st.booleans()) else []
    container, i, path = draw(st.sampled_from(slots or tree.slots))
    tree.put(container, i, yaml.SequenceNode("tag:yaml.org,2002:seq", [], flow_style=True))
    return f"empty list at {path}"


def m_duplicate_item(draw, tree):
    sequences = [s for s in tree.sequences() if s.value]
    if not sequences:  # a file with no list: duplicate a mapping entry instead
        return m_duplicate_key(draw, tree)
    seq = draw(st.sampled_from(sequences))
    seq.value.insert(draw(st.integers(0, len(seq.value))), clone(draw(st.sampled_from(seq.value))))
    return "duplicate a list item"


def m_duplicate_range_id(draw, tree):
    ranges = next(v for k, v in tree.root.value if k.value == "ranges").value
    i, j = draw(st.lists(st.integers(0, len(ranges) - 1), min_size=2, max_size=2, unique=True))
    source = next(v for k, v in ranges[i].value if k.value == "id")
    target = ranges[j]
    target.value = [(k, clone(source) if k.value == "id" else v) for k, v in target.value]
    return f"range {j} takes the id of range {i}"


def m_explicit_tag(draw, tree):
    container, i, path = _scalar_slot(draw, tree)
    node = tree.get(container, i)
    tag = draw(st.sampled_from(["timestamp", "bool", "int", "float", "binary"]))
    tree.put(
        container, i, yaml.ScalarNode(f"tag:yaml.org,2002:{tag}", node.value, style=node.style)
    )
    return f"!!{tag} on {path}"


def m_self_reference(draw, tree):
    container, i, path = draw(st.sampled_from(tree.slots))
    ancestor = draw(st.sampled_from([tree.root, container]))
    tree.put(container, i, ancestor)
    return f"{path} refers back to its container"


MUTATIONS = {
    "drop-key": m_drop_key,
    "duplicate-key": m_duplicate_key,
    "unknown-key": m_unknown_key,
    "unknown-key-control-char": m_unknown_key_control,
    "wrong-type": m_wrong_type,
    "nan": m_nan,
    "1e308": m_huge_float,
    "minus-one": m_minus_one,
    "huge-int": m_huge_int,
    "negative-span": m_negative_span,
    "empty-list": m_empty_list,
    "duplicate-item": m_duplicate_item,
    "duplicate-range-id": m_duplicate_range_id,
    "long-string": m_long_string,
    "lone-surrogate": m_lone_surrogate,
    "explicit-tag": m_explicit_tag,
    "self-reference": m_self_reference,
}
ONLY = {"duplicate-range-id": {"procedure"}}


def mutated(name: str, kind: str):
    @st.composite
    def build(draw):
        tree = Tree(name)
        steps = []
        for _ in range(draw(st.integers(1, 2))):
            steps.append(MUTATIONS[kind](draw, tree))
            tree.refresh()
        return tree.text(), steps

    return build()


def _cases(pairs):
    return [pytest.param(name, kind, id=f"{name}-{kind}") for name, kind in pairs]


class TestMutatedGoodFiles:
    @pytest.mark.parametrize("name", NAMES)
    def test_good_file_loads(self, name, workdir):
        """Each packaged good file loads, and so does its node tree written back out (the mutations'
        baseline)."""
        LOADERS[name](GOOD_FILES[name])
        path = write_case(workdir, name, "b:unmutated", Tree(name).text())
        LOADERS[name](path)

    @pytest.mark.parametrize(
        "name, kind",
        _cases(
            (name, kind) for kind in MUTATIONS for name in NAMES if name in ONLY.get(kind, {name})
        ),
    )
    @FUZZ
    @given(data=st.data())
    def test_mutation_loads_or_is_reported(self, name, kind, data, workdir):
        """A good file with a mutation either loads or is refused with file:line problems only."""
        text, steps = data.draw(mutated(name, kind), label="mutated file")
        assert_loads_or_reports(name, write_case(workdir, name, f"b:{kind}", text))


# --- (c) bytes that are not good YAML text --------------------------------------------------

#: Characters PyYAML's reader refuses anywhere in a stream.
REFUSED = [
    "\x00",
    "\x01",
    "\x07",
    "\x08",
    "\x0b",
    "\x0c",
    "\x1b",
    "\x7f",
    "\x80",
    "\x9f",
    "\ufffe",
    "\uffff",
]
PRINTABLE = st.characters(
    blacklist_categories=("Cs", "Cc", "Co", "Cn"), blacklist_characters="\ufeff"
) | st.sampled_from(
    ["\n", "\t", " ", ":", "-", "{", "}", "[", "]", "&", "*", "!", "|", ">", "'", '"', "#"]
)


def _good_bytes(name):
    return GOOD_TEXT[name].encode("utf-8")


def random_bytes(name):
    return st.binary(max_size=3000)


def printable_text(name):
    return st.text(PRINTABLE, max_size=2000).map(lambda t: t.encode("utf-8"))


def truncated_text(name):
    text = GOOD_TEXT[name]
    return st.integers(0, len(text)).map(lambda n: text[:n].encode("utf-8"))


def not_utf8(name):
    raw = _good_bytes(name)
    text = GOOD_TEXT[name]

    @st.composite
    def build(draw):
        how = draw(st.sampled_from(["insert-byte", "utf-16", "cut-multibyte", "latin-1"]))
        if how == "insert-byte":
            at = draw(st.integers(0, len(raw)))
            return raw[:at] + bytes([draw(st.integers(0x80, 0xFF))]) + raw[at:]
        if how == "utf-16":
            return text.encode(draw(st.sampled_from(["utf-16", "utf-16-le", "utf-32"])))
        if how == "latin-1":
            return ("# état\n" + text).encode("latin-1", errors="replace")
        at = draw(st.integers(0, len(raw)))
        return (
            raw[:at] + "Ω".encode("utf-8")[:1] + raw[at:]
        )  # the first byte of a two-byte character

    return build()


def control_character(name):
    text = GOOD_TEXT[name]
    return st.tuples(st.integers(0, len(text)), st.sampled_from(REFUSED)).map(
        lambda p: (text[: p[0]] + p[1] + text[p[0] :]).encode("utf-8")
    )


BYTE_STRATEGIES = {
    "random-bytes": random_bytes,
    "printable-text": printable_text,
    "truncated": truncated_text,
    "not-utf8": not_utf8,
    "refused-character": control_character,
}


class TestBytes:
    @pytest.mark.parametrize(
        "name, kind", _cases((name, kind) for kind in BYTE_STRATEGIES for name in NAMES)
    )
    @FUZZ
    @given(data=st.data())
    def test_bytes_load_or_are_reported(self, name, kind, data, workdir):
        """Whatever bytes are in the file, loading succeeds or is refused with file:line problems
        only."""
        raw = data.draw(BYTE_STRATEGIES[kind](name), label="file bytes")
        assert_loads_or_reports(name, write_case(workdir, name, f"c:{kind}", raw))


# --- verirun check on mutated procedures ----------------------------------------------------


def run_check(path: Path) -> tuple[int, str]:
    """Run ``verirun check <path>`` in-process; output goes to UTF-8 streams, as on a terminal."""
    out_bytes, err_bytes = io.BytesIO(), io.BytesIO()
    out = io.TextIOWrapper(out_bytes, encoding="utf-8", errors="strict", write_through=True)
    err = io.TextIOWrapper(err_bytes, encoding="utf-8", errors="strict", write_through=True)
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(path)])
    return code, (out_bytes.getvalue() + err_bytes.getvalue()).decode("utf-8", errors="replace")


class TestCheckCommand:
    @pytest.mark.parametrize("kind", list(MUTATIONS))
    @FUZZ_CLI
    @given(data=st.data())
    def test_check_exits_0_or_1_without_traceback(self, kind, data, workdir):
        """`verirun check` on a mutated procedure exits 0 (ok) or 1 (file:line problems), never with
        a traceback."""
        text, steps = data.draw(mutated("procedure", kind), label="mutated procedure")
        path = write_case(workdir, "check-cli", f"b:{kind}", text)
        code, output = run_check(path)
        assert "Traceback" not in output and "internal error" not in output, output[-500:]
        assert code in (0, 1), (code, output[-500:])
        lines = [line for line in output.splitlines() if line.strip()]
        if code == 0:
            assert lines and lines[-1].startswith(f"{path}: ok: "), lines
        else:
            assert lines and all(line.startswith(f"{path}:") for line in lines), lines[:5]


# --- minimal reproductions of what the strategies found --------------------------------------


def _write(tmp_path, text, name="case.yaml") -> Path:
    path = tmp_path / name
    (path.write_bytes(text) if isinstance(text, bytes) else path.write_text(text, encoding="utf-8"))
    return path


def _one_problem(path: Path, loader, line: int) -> str:
    with pytest.raises(ProcedureError) as info:
        loader(path)
    problems = info.value.problems
    assert any(p.startswith(f"{path}:{line}: ") for p in problems), problems
    assert all("\n" not in p for p in problems), problems
    return "\n".join(problems)


class TestMinimalReproductions:
    def test_huge_int_full_scale_is_reported_at_its_line(self, tmp_path):
        """A full-scale written as a 400-digit integer is refused at its own line."""
        text = GOOD_TEXT["procedure"]
        assert "full-scale: 6 V\n" in text
        line = text[: text.index("full-scale: 6 V")].count("\n") + 1
        path = _write(tmp_path, text.replace("full-scale: 6 V", "full-scale: 1" + "0" * 400, 1))
        _one_problem(path, load_procedure, line)

    def test_huge_int_settle_is_reported_at_its_line(self, tmp_path):
        """A bench settle time written as a 400-digit integer is refused at its own line."""
        text = GOOD_TEXT["bench"]
        line = text[: text.index("settle:")].count("\n") + 1
        path = _write(tmp_path, re.sub(r"(?m)^settle: .*$", "settle: 1" + "0" * 400, text, count=1))
        _one_problem(path, load_bench, line)

    @pytest.mark.parametrize("name", NAMES)
    def test_cyclic_alias_is_reported(self, name, tmp_path):
        """A value that refers back to itself through an alias is refused with file:line."""
        path = _write(tmp_path, GOOD_TEXT[name] + "\nx-loop: &loop [*loop]\n")
        with pytest.raises(ProcedureError, match=rf"^{re.escape(str(path))}:\d+: "):
            load(name, path)

    @pytest.mark.parametrize("value", ["!!timestamp soon", "!!bool maybe", "!!float ''"])
    def test_explicit_tag_that_does_not_fit_is_reported(self, value, tmp_path):
        """A scalar with an explicit YAML tag its text does not fit is refused at its line."""
        path = _write(tmp_path, f"format: 1\nlab:\n  name: {value}\n")
        _one_problem(path, load_lab, 3)

    def test_invalid_utf8_is_reported_at_the_line_of_the_byte(self, tmp_path):
        """A byte that is not UTF-8 on line 3 is reported as <file>:3:."""
        path = _write(tmp_path, b"format: 1\nlab:\n  name: \xe9tat\n")
        _one_problem(path, load_lab, 3)

    def test_refused_character_is_reported_at_its_line_in_one_line(self, tmp_path):
        """A control character YAML refuses, on line 3, is reported as one problem at <file>:3:."""
        path = _write(tmp_path, "format: 1\nlab:\n  name: a\x07b\n")
        _one_problem(path, load_lab, 3)

    def test_key_with_a_newline_gives_a_one_line_problem(self, tmp_path):
        """An unknown key holding a newline is reported on one line, the key escaped."""
        path = _write(tmp_path, 'format: 1\n"bad\\nkey": 1\n')
        _one_problem(path, load_lab, 2)

    def test_check_with_a_lone_surrogate_in_the_id(self, tmp_path):
        """`verirun check` on a procedure whose id holds an escaped lone surrogate exits 0 or 1,
        not 70."""
        text = GOOD_TEXT["procedure"]
        assert "id: TH-VP-040" in text
        path = _write(tmp_path, text.replace("id: TH-VP-040", 'id: "TH-\\ud800"', 1))
        code, output = run_check(path)
        assert code in (0, 1) and "internal error" not in output, (code, output)

    def test_check_reports_an_overflowing_tolerance_at_its_line(self, tmp_path):
        """A tolerance so wide its window overflows is a file:line problem of `verirun check`, not
        an internal error."""
        text = GOOD_TEXT["procedure"]
        text = text.replace("full-scale: 6 V", "full-scale: 100 MV", 1).replace(
            "accuracy: {class: 2.5}", "accuracy: {class: 1.0e+308}", 1
        )
        path = _write(tmp_path, text)
        code, output = run_check(path)
        assert code == 1 and output.startswith(f"{path}:"), (code, output)

    def test_check_reports_a_far_ohms_point_at_its_line(self, tmp_path):
        """A series-ohms point of 1e308 Ω is a file:line problem of `verirun check`, not an internal
        error."""
        text = GOOD_TEXT["procedure"]
        assert "points: [4 ohm, 16 ohm, 64 ohm]" in text
        path = _write(
            tmp_path,
            text.replace(
                "points: [4 ohm, 16 ohm, 64 ohm]", "points: [1e308 ohm, 16 ohm, 64 ohm]", 1
            ),
        )
        code, output = run_check(path)
        assert code == 1 and output.startswith(f"{path}:"), (code, output)

    def test_zero_hazardous_threshold_is_refused_at_load(self, tmp_path):
        """A hazardous-live threshold of 0 V is refused at load with its line, not left to fail when
        the run starts."""
        text = GOOD_TEXT["bench"]
        assert "hazardous-dc: 60 V" in text
        line = text[: text.index("hazardous-dc:")].count("\n") + 1
        path = _write(tmp_path, text.replace("hazardous-dc: 60 V", "hazardous-dc: 0 V"))
        _one_problem(path, load_bench, line)

    def test_virtual_meter_gain_must_be_finite(self, tmp_path):
        """A virtual meter gain of .nan is refused at load with its line."""
        text = GOOD_TEXT["virtual-meter"]
        assert "gain: 1.012" in text
        line = text[: text.index("gain: 1.012")].count("\n") + 1
        path = _write(tmp_path, text.replace("gain: 1.012", "gain: .nan"))
        _one_problem(path, VirtualMeter, line)

    def test_impossible_date_is_reported_at_its_line(self, tmp_path):
        """A calibration due date of 31 February is reported at the line it is written on."""
        text = GOOD_TEXT["bench"]
        line = text[: text.index("calibration-due:")].count("\n") + 1
        path = _write(
            tmp_path, re.sub(r"calibration-due: \S+", "calibration-due: 2099-02-31", text, count=1)
        )
        _one_problem(path, load_bench, line)
