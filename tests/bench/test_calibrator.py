"""The calibrator driver, checked exchange by exchange and against the simulated device."""

from __future__ import annotations

import math
import subprocess
import sys
import threading
import time

import pytest

from verirun.bench import Calibrator, load_profile
from verirun.bench.sim import SIM_RESOURCE, sim_library
from verirun.errors import BenchError

# Command texts below are those of the packaged scpi-generic profile.
ERR = "SYST:ERR?"
EMPTY = '0,"No error"'  # SCPI-99 vol 2, SYSTem:ERRor: code 0 means the queue is empty
OUT_OF_RANGE = '-222,"Data out of range"'  # SCPI-99 vol 2, error code list (from memory)
SIM_COMMAND_ERROR = '-100,"Command error"'  # what bench/sim/calibrator.yaml queues


def cal(expect, pairs):
    return Calibrator(expect(pairs), "scpi-generic")


class TestIdentify:
    def test_sends_idn_and_strips_the_reply(self, expect):
        """identify() sends the IEEE 488.2 identity query and returns the reply without surrounding
        blanks."""
        assert cal(expect, [("*IDN?", " Maker,Model,1,2 \r")]).identify() == "Maker,Model,1,2"

    def test_empty_identity_is_an_error(self, expect):
        """An empty identity is refused, naming the command."""
        with pytest.raises(BenchError) as err:
            cal(expect, [("*IDN?", "")]).identify()
        assert err.value.command == "*IDN?"

    def test_simulated_device(self, sim):
        """The simulated calibrator answers with its invented identity
        (bench/sim/calibrator.yaml)."""
        assert sim.identify() == "Verirun Simulation,SIM-CAL-1,0,1.0"


class TestReset:
    def test_resets_clears_and_discards_stale_errors(self, expect):
        """reset() sends *RST and *CLS, then empties the error queue without raising for old
        entries."""
        cal(expect, [("*RST", None), ("*CLS", None), (ERR, OUT_OF_RANGE), (ERR, EMPTY)]).reset()


class TestSource:
    def test_dc_voltage_exchanges(self, expect):
        """Sourcing DC voltage selects DC, sets the level, and checks the error queue after each
        command."""
        cal(expect, [("FUNC DC", None), (ERR, EMPTY), ("VOLT 5.0", None), (ERR, EMPTY)]).source(
            "dc-voltage", 5
        )

    def test_ac_sets_frequency_before_level(self, expect):
        """Sourcing AC sends the frequency before the level, so the new level never appears at the
        old frequency."""
        cal(
            expect,
            [
                ("FUNC SIN", None),
                (ERR, EMPTY),
                ("FREQ 1000.0", None),
                (ERR, EMPTY),
                ("CURR 0.5", None),
                (ERR, EMPTY),
            ],
        ).source("ac-current", 0.5, 1000)

    def test_resistance_has_no_select_command(self, expect):
        """Resistance is set with its own command alone."""
        cal(expect, [("RES 10000.0", None), (ERR, EMPTY)]).source("resistance", 1e4)

    @pytest.mark.parametrize(
        "value, text",
        [
            (0.1 + 0.2, "0.30000000000000004"),
            (1.23456789012345e-7, "1.23456789012345e-07"),
            (-999.999999999999, "-999.999999999999"),
        ],
    )
    def test_values_are_sent_in_full_precision(self, expect, value, text):
        """The value is written so that it parses back to the very same float."""
        cal(expect, [("FUNC DC", None), (ERR, EMPTY), (f"VOLT {text}", None), (ERR, EMPTY)]).source(
            "dc-voltage", value
        )
        assert float(text) == value

    @pytest.mark.parametrize(
        "function, value, frequency, words",
        [
            ("dc-voltage", 1000.5, None, ["1000.5 V", "above", "1000.0 V"]),
            ("dc-voltage", -1001, None, ["-1001.0 V", "below", "-1000.0 V"]),
            ("ac-voltage", -1.0, 50, ["-1.0 V", "below", "0.0 V"]),
            ("ac-voltage", 1.0, 5.0, ["frequency 5.0 Hz", "below", "10.0 Hz"]),
            ("ac-current", 1.0, 20000.0, ["frequency 20000.0 Hz", "above", "10000.0 Hz"]),
            ("dc-current", math.nan, None, ["finite", "nan"]),
            ("dc-current", math.inf, None, ["finite", "inf"]),
            ("ac-voltage", 1.0, math.nan, ["frequency", "finite", "nan"]),
            ("ac-voltage", 1.0, None, ["needs a frequency", "10.0 Hz", "100000.0 Hz"]),
            ("dc-voltage", 1.0, 50.0, ["takes no frequency", "50.0 Hz"]),
            ("dc-voltage", True, None, ["must be a number", "True"]),
            ("dc-voltage", "5", None, ["must be a number", "'5'"]),
            ("dc-voltage", 2**60 + 1, None, ["cannot be sent exactly"]),
            ("dc-volts", 1.0, None, ["unknown function", "'dc-volts'", "dc-voltage"]),
        ],
    )
    def test_strict_validator_sends_nothing(self, expect, function, value, frequency, words):
        """A stimulus outside the profile's limits, or malformed, is refused with the value and
        limit named, before anything is sent."""
        with pytest.raises(BenchError) as err:
            cal(expect, []).source(function, value, frequency)
        for word in words:
            assert word in str(err.value)
        assert "nothing was sent" in str(err.value) or "unknown function" in str(err.value)

    def test_function_missing_from_profile_is_refused(self, expect, custom_profile):
        """A function the profile does not list is refused without sending anything."""
        path = custom_profile(lambda data: data["functions"].pop("resistance"))
        with pytest.raises(BenchError, match="does not source resistance"):
            Calibrator(expect([]), path).source("resistance", 100.0)

    def test_instrument_error_names_command_and_answer(self, expect):
        """An error queued after a command stops the sequence and is reported with that command and
        the raw entry."""
        driver = cal(
            expect,
            [
                ("FUNC DC", None),
                (ERR, EMPTY),
                ("VOLT 5.0", None),
                (ERR, OUT_OF_RANGE),
                (ERR, EMPTY),
            ],
        )
        with pytest.raises(BenchError) as err:
            driver.source("dc-voltage", 5.0)
        assert err.value.command == "VOLT 5.0"
        assert err.value.answer == OUT_OF_RANGE
        assert "-222 Data out of range" in err.value.message

    def test_failed_select_stops_before_the_level(self, expect):
        """If selecting the function is rejected, the level is never sent."""
        driver = cal(expect, [("FUNC SIN", None), (ERR, SIM_COMMAND_ERROR), (ERR, EMPTY)])
        with pytest.raises(BenchError) as err:
            driver.source("ac-voltage", 1.0, 50.0)
        assert err.value.command == "FUNC SIN"

    def test_simulated_state_follows_the_source(self, sim):
        """After source(), the simulated device holds the function, level and frequency that were
        asked for."""
        sim.source("ac-voltage", 12.5, 400.0)
        assert (
            sim.resource.query("FUNC?"),
            sim.resource.query("VOLT?"),
            sim.resource.query("FREQ?"),
        ) == ("SIN", "12.5", "400.0")
        sim.source("dc-current", -0.001234567890123)
        assert (sim.resource.query("FUNC?"), sim.resource.query("CURR?")) == (
            "DC",
            "-0.001234567890123",
        )
        sim.source("resistance", 1.9e3)
        assert sim.resource.query("RES?") == "1900.0"

    def test_validator_leaves_the_simulated_device_untouched(self, sim):
        """A refused stimulus changes nothing on the device and queues no error there."""
        with pytest.raises(BenchError):
            sim.source("dc-voltage", 1500.0)
        assert sim.resource.query("VOLT?") == "0.0"  # default in bench/sim/calibrator.yaml
        assert sim.errors() == []

    def test_device_rejection_is_reported_when_profile_is_wider(self, tmp_path, custom_profile):
        """With profile limits wider than the device's, the device's own rejection surfaces as a
        BenchError."""
        path = custom_profile(
            lambda data: data["functions"]["dc-voltage"]["level"].update(max=5000.0)
        )
        with Calibrator.open(sim_library(tmp_path), SIM_RESOURCE, path, timeout_ms=200) as driver:
            with pytest.raises(BenchError) as err:
                driver.source("dc-voltage", 1500.0)
            assert err.value.command == "VOLT 1500.0"
            assert err.value.answer == SIM_COMMAND_ERROR
            assert driver.resource.query("VOLT?") == "0.0"
            assert driver.errors() == []  # the report drained the queue


class TestOutput:
    def test_output_on_checks_errors(self, expect):
        """output_on() sends the on command and checks the error queue."""
        cal(expect, [("OUTP ON", None), (ERR, EMPTY)]).output_on()

    def test_standby_checks_errors(self, expect):
        """standby() sends the off command and checks the error queue."""
        cal(expect, [("OUTP OFF", None), (ERR, EMPTY)]).standby()

    @pytest.mark.parametrize(
        "reply, on", [("1", True), ("0", False), ("ON", True), ("OFF", False), ("1\n", True)]
    )
    def test_output_is_on_reads_back(self, expect, reply, on):
        """The output state is read from the instrument and interpreted by the profile's replies
        (SCPI boolean 1|0, or ON|OFF)."""
        assert cal(expect, [("OUTP?", reply)]).output_is_on() is on

    def test_unknown_output_reply_is_an_error(self, expect):
        """A reply meaning neither on nor off is an error naming the query and the answer."""
        with pytest.raises(BenchError) as err:
            cal(expect, [("OUTP?", "2")]).output_is_on()
        assert (err.value.command, err.value.answer) == ("OUTP?", "2")

    def test_simulated_output_read_back(self, sim):
        """The simulated output starts off, reads on after output_on() and off after standby()."""
        assert sim.output_is_on() is False
        sim.output_on()
        assert sim.output_is_on() is True
        sim.standby()
        assert sim.output_is_on() is False


class TestErrors:
    def test_drains_until_empty(self, expect):
        """errors() reads entries until the empty code and returns them oldest first, without
        quotes."""
        driver = cal(
            expect, [(ERR, OUT_OF_RANGE), (ERR, '-113,"Undefined header"'), (ERR, '+0,"No error"')]
        )
        assert driver.errors() == [(-222, "Data out of range"), (-113, "Undefined header")]

    def test_entries_after_an_empty_queue_are_still_read(self, expect):
        """An empty queue answered once does not hide a real entry or a malformed reply later:
        each later answer is parsed unless it is exactly an empty-queue answer already seen."""
        driver = cal(
            expect, [(ERR, EMPTY), (ERR, OUT_OF_RANGE), (ERR, EMPTY), (ERR, "+0"), (ERR, "OK")]
        )
        assert driver.errors() == []
        assert driver.errors() == [(-222, "Data out of range")]
        assert driver.errors() == []  # "+0", written differently, is parsed and still empty
        with pytest.raises(BenchError) as err:
            driver.errors()
        assert err.value.answer == "OK"

    def test_bounded_when_the_queue_never_empties(self, expect):
        """An instrument that never reports an empty queue is an error after max_reads (20 in
        scpi-generic), not a hang."""
        driver = cal(expect, [(ERR, SIM_COMMAND_ERROR)] * 20)
        with pytest.raises(BenchError, match="still not empty after 20 reads"):
            driver.errors()

    def test_malformed_entry_is_an_error(self, expect):
        """A reply that is not code,description is refused, naming the answer."""
        with pytest.raises(BenchError) as err:
            cal(expect, [(ERR, "OK")]).errors()
        assert (err.value.command, err.value.answer) == (ERR, "OK")

    def test_simulated_queue_records_a_direct_out_of_range_write(self, sim):
        """A write that bypasses the driver and breaks the device's limit is found in the device's
        error queue."""
        sim.resource.write("VOLT 5000")
        assert sim.errors() == [(-100, "Command error")]
        assert sim.errors() == []


class TestLinkFailures:
    def test_timeout_becomes_bench_error(self, expect):
        """A VISA timeout is reported in plain words with the command, not as a VISA traceback."""
        import pyvisa

        timeout = pyvisa.errors.VisaIOError(pyvisa.constants.StatusCode.error_timeout)
        with pytest.raises(BenchError) as err:
            cal(expect, [("*IDN?", timeout)]).identify()
        assert err.value.command == "*IDN?"
        assert err.value.message.startswith("no answer from the calibrator within 200 ms")

    def test_lost_connection_becomes_bench_error(self, expect):
        """An OSError from the link is reported as a lost connection, naming the command."""
        with pytest.raises(BenchError, match="connection to the calibrator was lost") as err:
            cal(
                expect, [("OUTP ON", ConnectionResetError(104, "Connection reset by peer"))]
            ).output_on()
        assert err.value.command == "OUTP ON"

    def test_simulated_timeout(self, tmp_path, custom_profile):
        """A query the simulated device does not answer times out within the 200 ms timeout and
        becomes a BenchError."""
        path = custom_profile(lambda data: data["commands"].update(identify="*IDN"))
        with Calibrator.open(sim_library(tmp_path), SIM_RESOURCE, path, timeout_ms=200) as driver:
            start = time.monotonic()
            with pytest.raises(BenchError, match="no answer") as err:
                driver.identify()
            assert time.monotonic() - start < 2.0
            assert err.value.command == "*IDN"

    def test_other_exceptions_are_not_disguised(self, expect):
        """An exception that is neither a VISA nor an OS error is a bug and propagates unchanged."""
        with pytest.raises(ZeroDivisionError):
            cal(expect, [("*IDN?", ZeroDivisionError())]).identify()


class TestOpen:
    def test_missing_resource(self, monkeypatch):
        """A resource the VISA library cannot find is a BenchError naming it and VISA's reason."""
        import pyvisa

        class NoSuchResource:
            def __init__(self, library):
                pass

            def open_resource(self, name, **settings):
                raise pyvisa.errors.VisaIOError(
                    pyvisa.constants.StatusCode.error_resource_not_found
                )

        monkeypatch.setattr(pyvisa, "ResourceManager", NoSuchResource)
        with pytest.raises(
            BenchError,
            match="cannot open the calibrator at 'GPIB0::99::INSTR'.*"
            "Insufficient location information",
        ):
            Calibrator.open("", "GPIB0::99::INSTR", "scpi-generic")

    def test_missing_library_file(self, tmp_path):
        """A simulated library whose file does not exist is a one-line BenchError."""
        with pytest.raises(BenchError, match="cannot load the VISA library") as err:
            Calibrator.open(f"{tmp_path / 'none.yaml'}@sim", SIM_RESOURCE, "scpi-generic")
        assert "\n" not in str(err.value) and "Traceback" not in str(err.value)

    @pytest.mark.parametrize("timeout", [0, -5, 1.5, True])
    def test_bad_timeout(self, tmp_path, timeout):
        """A timeout that is not a positive whole number of milliseconds is refused."""
        with pytest.raises(BenchError, match="timeout_ms"):
            Calibrator.open(sim_library(tmp_path), SIM_RESOURCE, "scpi-generic", timeout_ms=timeout)

    def test_sets_terminations_and_timeout(self, sim):
        """The opened resource uses the profile's terminations and the timeout asked for."""
        assert (
            sim.resource.read_termination,
            sim.resource.write_termination,
            sim.resource.timeout,
        ) == ("\n", "\n", 200)

    def test_fresh_copies_start_from_default_state(self, tmp_path):
        """Two work folders give two independent simulated devices."""
        with Calibrator.open(
            sim_library(tmp_path / "a"), SIM_RESOURCE, "scpi-generic", timeout_ms=200
        ) as one:
            one.source("dc-voltage", 7.0)
        with Calibrator.open(
            sim_library(tmp_path / "b"), SIM_RESOURCE, "scpi-generic", timeout_ms=200
        ) as two:
            assert two.resource.query("VOLT?") == "0.0"

    def test_pyvisa_is_imported_only_when_opening(self):
        """Importing the bench does not import pyvisa, which costs start-up time."""
        code = "import sys, verirun.bench; print('pyvisa' in sys.modules)"
        out = subprocess.run(
            [sys.executable, "-c", code], capture_output=True, text=True, check=True
        ).stdout
        assert out.strip() == "False"


class TestClose:
    def test_closes_once(self, expect):
        """close() closes the resource, and a second close() does nothing."""
        fake = expect([])
        driver = Calibrator(fake, load_profile("scpi-generic"))
        driver.close()
        driver.close()
        assert fake.closed

    def test_failed_close_is_a_bench_error(self, expect):
        """A link failure while closing is reported in plain words, naming no command."""
        fake = expect([])

        def broken():
            raise BrokenPipeError(32, "Broken pipe")

        fake.close = broken
        with pytest.raises(
            BenchError, match="connection to the calibrator was lost: Broken pipe"
        ) as err:
            Calibrator(fake, "scpi-generic").close()
        assert err.value.command is None


class SlowSequence:
    """Accepts any command from any number of callers, slowly, recording what it saw."""

    def __init__(self):
        self.seen = []

    def write(self, command):
        self.seen.append(command)
        time.sleep(0.0005)  # invites a thread switch between a command and its error check

    def query(self, command):
        self.seen.append(command)
        time.sleep(0.0005)
        return EMPTY


def test_source_sequences_do_not_interleave_between_threads():
    """Two threads sourcing at once each get their whole command-and-check sequence without the
    other's commands inside it."""
    fake = SlowSequence()
    driver = Calibrator(fake, "scpi-generic")
    threads = [
        threading.Thread(target=lambda v=v: [driver.source("dc-voltage", v) for _ in range(10)])
        for v in (1.0, 2.0)
    ]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    blocks = [fake.seen[i : i + 4] for i in range(0, len(fake.seen), 4)]
    assert len(blocks) == 20
    for block in blocks:
        assert block in (["FUNC DC", ERR, "VOLT 1.0", ERR], ["FUNC DC", ERR, "VOLT 2.0", ERR])
