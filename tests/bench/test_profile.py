"""Driver profiles: loading, strict validation with file:line messages, and the commands they
render."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from verirun.bench import FUNCTIONS, load_profile
from verirun.bench.profile import AcFunction, packaged_profiles
from verirun.errors import BenchError, ProcedureError

DATA = Path(__file__).resolve().parents[1] / "data"

GOOD = (DATA / "tiny-profile.yaml").read_text(encoding="utf-8")


def write(tmp_path, text, name="tiny.yaml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def problems(tmp_path, text):
    path = write(tmp_path, text)
    with pytest.raises(ProcedureError) as err:
        load_profile(path)
    return [line.replace(str(path), "FILE") for line in err.value.problems]


class TestLoadProfile:
    def test_packaged_by_name(self):
        """The packaged scpi-generic profile loads by name and sources all five functions."""
        profile = load_profile("scpi-generic")
        assert profile.name == "scpi-generic"
        assert all(profile.function(name) is not None for name in FUNCTIONS)
        assert FUNCTIONS == ("dc-voltage", "dc-current", "ac-voltage", "ac-current", "resistance")

    def test_packaged_uses_scpi_common_forms(self):
        """The packaged profile speaks IEEE 488.2 common commands and SCPI OUTPut / SYSTem:ERRor
        (SCPI-99 vol 2, from memory)."""
        profile = load_profile("scpi-generic")
        assert (
            profile.commands.identify,
            profile.commands.reset,
            profile.commands.clear_status,
        ) == ("*IDN?", "*RST", "*CLS")
        assert (
            profile.output_state.query,
            profile.error_queue.query,
            profile.error_queue.empty_code,
        ) == ("OUTP?", "SYST:ERR?", 0)

    def test_packaged_ac_functions_have_frequency(self):
        """Only the AC functions of the packaged profile carry a frequency setting."""
        profile = load_profile("scpi-generic")
        assert [name for name in FUNCTIONS if isinstance(profile.function(name), AcFunction)] == [
            "ac-voltage",
            "ac-current",
        ]

    def test_by_path(self, tmp_path):
        """A path, as text or Path, loads that file."""
        path = write(tmp_path, GOOD)
        assert load_profile(path).name == load_profile(str(path)).name == "tiny"

    def test_unknown_name_lists_the_packaged_ones(self):
        """An unknown bare name is refused, listing the packaged profiles."""
        with pytest.raises(
            ProcedureError, match="no packaged driver profile named 'nope'.*scpi-generic"
        ):
            load_profile("nope")
        assert "scpi-generic" in packaged_profiles()

    def test_missing_file(self, tmp_path):
        """A path to a file that does not exist is a ProcedureError naming it."""
        with pytest.raises(ProcedureError, match="no such file"):
            load_profile(tmp_path / "absent.yaml")

    def test_an_edited_file_is_read_again(self, tmp_path):
        """A profile file changed between two runs is loaded as it now reads, and a broken edit
        is refused, naming the file: a loaded profile is kept only for the same text."""
        path = write(tmp_path, GOOD)
        first = load_profile(path)
        assert load_profile(path) is first  # the same text: the same (frozen) profile
        write(tmp_path, GOOD.replace("name: tiny", "name: tiny-edited"))
        assert load_profile(path).name == "tiny-edited"
        write(tmp_path, GOOD.replace("format: 1", "format: 2"))
        with pytest.raises(ProcedureError, match="newer than this verirun reads"):
            load_profile(path)
        write(tmp_path, GOOD)
        assert load_profile(path).name == "tiny"

    def test_the_same_text_elsewhere_names_its_own_file(self, tmp_path):
        """Two files with the same broken text are each refused in their own name."""
        broken = GOOD.replace("format: 1", "format: 2")
        for name in ("one.yaml", "two.yaml"):
            path = write(tmp_path, broken, name)
            with pytest.raises(ProcedureError) as err:
                load_profile(path)
            assert err.value.problems[0].startswith(f"{path}:1: ")

    def test_frozen(self):
        """A loaded profile cannot be changed."""
        profile = load_profile("scpi-generic")
        with pytest.raises(Exception):
            profile.name = "other"  # type: ignore[misc]


class TestMalformed:
    def test_newer_format_is_refused(self, tmp_path):
        """A profile of a newer format is refused rather than half-read."""
        found = problems(tmp_path, GOOD.replace("format: 1", "format: 2"))
        assert found == [
            "FILE:1: format: this driver profile is format 2, newer than this verirun reads"
            " (format 1); upgrade verirun"
        ]

    def test_missing_format(self, tmp_path):
        """A profile without a format version is refused."""
        found = problems(tmp_path, GOOD.replace("format: 1\n", ""))
        assert len(found) == 1 and found[0].startswith("FILE:1: ") and "required" in found[0]
        assert "format version" in found[0]

    def test_misspelt_key(self, tmp_path):
        """A misspelt key is reported with its line and dotted field."""
        found = problems(tmp_path, GOOD.replace("    select:", "    selct:"))
        assert found == ["FILE:21: functions.dc-voltage.selct: unknown key (check its spelling)"]

    def test_unknown_function(self, tmp_path):
        """A function name verirun does not know is reported as an unknown key."""
        found = problems(tmp_path, GOOD.replace("  dc-voltage:", "  dc-volts:"))
        assert found == ["FILE:20: functions.dc-volts: unknown key (check its spelling)"]

    def test_ac_without_frequency(self, tmp_path):
        """An AC function without a frequency setting is reported at that function."""
        text = GOOD.replace(
            '    frequency: {command: "FREQ {value}", min: 10.0, max: 1000.0}\n', ""
        )
        found = problems(tmp_path, text)
        assert len(found) == 1 and found[0].startswith("FILE:23: functions.ac-voltage")
        assert found[0].endswith("required, but missing")

    def test_dc_with_frequency(self, tmp_path):
        """A frequency setting on a DC function is refused."""
        text = GOOD.replace(
            "min: -10.0, max: 10.0}\n",
            "min: -10.0, max: 10.0}\n"
            '    frequency: {command: "FREQ {value}", min: 1.0, max: 2.0}\n',
        )
        assert problems(tmp_path, text) == [
            "FILE:23: functions.dc-voltage.frequency: unknown key (check its spelling)"
        ]

    def test_min_above_max(self, tmp_path):
        """Limits the wrong way round are refused at their setting."""
        text = GOOD.replace("min: -10.0, max: 10.0", "min: 10.0, max: -10.0")
        assert problems(tmp_path, text) == [
            "FILE:22: functions.dc-voltage.level: min (10.0) is above max (-10.0)"
        ]

    @pytest.mark.parametrize(
        "template",
        [
            '"VOLT"',
            '"VOLT {level}"',
            '"VOLT {value:.3f}"',
            '"VOLT {value} {value}"',
            '"VOLT {value"',
        ],
    )
    def test_template_needs_one_plain_placeholder(self, tmp_path, template):
        """A level command must hold {value} exactly once and format nothing itself (no silent
        rounding)."""
        found = problems(
            tmp_path, GOOD.replace('"VOLT {value}", min: -10.0', f"{template}, min: -10.0")
        )
        assert len(found) == 1 and found[0].startswith(
            "FILE:22: functions.dc-voltage.level.command: "
        )

    def test_unquoted_on_is_explained(self, tmp_path):
        """An unquoted ON, which YAML reads as true, is reported with the advice to quote it."""
        found = problems(tmp_path, GOOD.replace('on-replies: ["1"]', "on-replies: [ON]"))
        assert len(found) == 1 and found[0].startswith("FILE:15: output-state.on-replies[1]: ")
        assert "put the text in quotes" in found[0]

    def test_non_finite_and_boolean_limits(self, tmp_path):
        """Limits must be finite numbers; .inf and yes are refused, each with its own line."""
        text = GOOD.replace("max: 10.0}\n  ac", "max: .inf}\n  ac").replace(
            "min: 0.0, max: 10.0", "min: yes, max: 10.0"
        )
        found = problems(tmp_path, text)
        assert [line.split(": ")[:2] for line in found] == [
            ["FILE:22", "functions.dc-voltage.level.max"],
            ["FILE:24", "functions.ac-voltage.level.min"],
        ]

    def test_empty_replies(self, tmp_path):
        """An output state with no reply meaning off cannot be read back, so it is refused."""
        found = problems(tmp_path, GOOD.replace('off-replies: ["0"]', "off-replies: []"))
        assert found == [
            "FILE:13: output-state: list at least one reply meaning on and one meaning off"
        ]

    def test_same_reply_for_on_and_off(self, tmp_path):
        """A reply listed as both on and off is ambiguous and refused."""
        found = problems(tmp_path, GOOD.replace('off-replies: ["0"]', 'off-replies: ["0", "1"]'))
        assert found == [
            "FILE:13: output-state: replies ['1'] are listed as meaning both on and off"
        ]

    def test_duplicate_key(self, tmp_path):
        """A key given twice is reported rather than silently overwritten."""
        found = problems(tmp_path, GOOD.replace("name: tiny\n", "name: tiny\nname: again\n"))
        assert found == ["FILE:3: name: duplicate key (first given on line 2)"]

    def test_every_problem_at_once(self, tmp_path):
        """Several problems are all reported in one error, one line each."""
        text = GOOD.replace("timeout-ms: 1000", "timeout-ms: 0").replace('  reset: "*RST"\n', "")
        found = problems(tmp_path, text)
        assert [line.split(": ")[1] for line in found] == ["link.timeout-ms", "commands.reset"]


class TestSourceCommands:
    def test_renders_select_frequency_level(self, tmp_path):
        """source_commands returns the select commands, then the frequency, then the level, values
        exact."""
        profile = load_profile(write(tmp_path, GOOD))
        assert profile.source_commands("ac-voltage", 1 / 3, 50) == [
            "FREQ 50.0",
            "VOLT 0.3333333333333333",
        ]
        assert profile.source_commands("dc-voltage", -10) == ["FUNC DC", "VOLT -10.0"]

    def test_limits_are_inclusive(self, tmp_path):
        """A value exactly at a limit is accepted; the next float beyond it is not."""
        import math

        profile = load_profile(write(tmp_path, GOOD))
        assert profile.source_commands("dc-voltage", 10.0)[-1] == "VOLT 10.0"
        with pytest.raises(BenchError, match="above the calibrator limit 10.0 V"):
            profile.source_commands("dc-voltage", math.nextafter(10.0, math.inf))


class TestCommandTextsAndReplies:
    @pytest.mark.parametrize(
        "command, code",
        [
            (
                '"OUTP OFF\\nOUTP ON"',
                "U+000A",
            ),  # a line break: two commands on a link that splits at newlines
            ('"OUTP OFF\\rOUTP ON"', "U+000D"),
            ('"OUTP OFF\\x00"', "U+0000"),
            ('"OUTP\\tOFF"', "U+0009"),
            ('"OUTP OFF\\u202e"', "U+202E"),
        ],
    )
    def test_control_characters_in_a_command_are_refused(self, tmp_path, command, code):
        """A fixed command holding a control character is refused at its line and field."""
        found = problems(tmp_path, GOOD.replace('output-off: "OUTP OFF"', f"output-off: {command}"))
        assert len(found) == 1 and found[0].startswith("FILE:12: commands.output-off: ")
        assert code in found[0]

    def test_control_character_in_a_template_is_refused(self, tmp_path):
        """A level template with a line break inside is refused."""
        found = problems(
            tmp_path,
            GOOD.replace('"VOLT {value}", min: -10.0', '"VOLT {value}\\nOUTP ON", min: -10.0'),
        )
        assert len(found) == 1 and found[0].startswith(
            "FILE:22: functions.dc-voltage.level.command: "
        )
        assert "U+000A" in found[0]

    def test_control_character_in_a_reply_is_refused(self, tmp_path):
        """A reply with a control character could never match the stripped answer: refused."""
        found = problems(tmp_path, GOOD.replace('off-replies: ["0"]', 'off-replies: ["0\\u0007"]'))
        assert len(found) == 1 and "output-state.off-replies[" in found[0] and "U+0007" in found[0]

    @pytest.mark.parametrize("on, off", [('["1", "ON"]', '["0", "on"]'), ('["On"]', '["0", "oN"]')])
    def test_replies_overlapping_in_another_case_are_refused(self, tmp_path, on, off):
        """On and off replies that differ only in case are listed as both."""
        text = GOOD.replace('on-replies: ["1"]', f"on-replies: {on}").replace(
            'off-replies: ["0"]', f"off-replies: {off}"
        )
        found = problems(tmp_path, text)
        assert len(found) == 1 and "listed as meaning both on and off" in found[0]

    @pytest.mark.parametrize(
        "on, off, reply",
        [
            ('["1"]', '["0", "ON"]', "'ON'"),  # SCPI-99 vol. 1, 7.3: ON means on
            ('["1"]', '["0", "+1"]', "'+1'"),  # a non-zero number means on
            ('["1", "OFF"]', '["0"]', "'OFF'"),
            ('["1", "0.0"]', '["0"]', "'0.0'"),
        ],
    )
    def test_replies_meaning_the_opposite_as_scpi_booleans_are_refused(
        self, tmp_path, on, off, reply
    ):
        """An off reply that SCPI boolean data reads as on (ON, a non-zero number), or an on reply
        it reads as off, is refused (SCPI-99 vol. 1, 7.3 Boolean program data)."""
        text = GOOD.replace('on-replies: ["1"]', f"on-replies: {on}").replace(
            'off-replies: ["0"]', f"off-replies: {off}"
        )
        found = problems(tmp_path, text)
        assert (
            len(found) == 1 and found[0].startswith("FILE:13: output-state: ") and reply in found[0]
        )

    def test_packaged_profile_replies_are_consistent(self):
        """The packaged profile's replies are SCPI booleans meaning what they are listed as."""
        state = load_profile("scpi-generic").output_state
        assert set(state.on_replies) == {"1", "ON"} and set(state.off_replies) == {"0", "OFF"}


def test_a_run_with_a_newline_in_a_command_is_refused_before_it_starts(tmp_path, capsys):
    """A bench whose profile has a line break inside the standby command does not start: exit 1,
    the profile's file, line and field named, no run folder made."""
    from pathlib import Path

    from verirun.cli import main

    edge = Path(__file__).resolve().parent.parent / "data" / "edge"
    profile = tmp_path / "split.yaml"
    profile.write_text(
        (
            Path(__file__).resolve().parent.parent.parent
            / "verirun"
            / "bench"
            / "profiles"
            / "scpi-generic.yaml"
        )
        .read_text()
        .replace('output-off: "OUTP OFF"', 'output-off: "OUTP OFF\\nOUTP ON"')
    )
    bench = tmp_path / "bench.yaml"
    bench.write_text(
        (edge / "bench.yaml").read_text().replace("profile: scpi-generic", f"profile: {profile}")
    )
    code = main(
        [
            "run",
            str(edge / "dcv-small.yaml"),
            "--bench",
            str(bench),
            "--readings",
            str(edge / "readings.csv"),
            "--simulate",
            "--serial",
            "S",
            "--customer",
            "C",
            "--runs",
            str(tmp_path / "runs"),
        ]
    )
    err = capsys.readouterr().err
    assert code == 1, err
    assert (
        f"{profile}:" in err
        and "commands.output-off: command text holds a control character (U+000A)" in err
    )
    assert not (tmp_path / "runs").exists()
