"""The output guard and the hazardous-live rule."""

from __future__ import annotations

import math

import pytest

from verirun.bench import Calibrator, HazardLimits, is_hazardous, output_guard
from verirun.errors import BenchError, SafetyError

# Command texts below are those of the packaged scpi-generic profile.
ERR = "SYST:ERR?"
EMPTY = '0,"No error"'  # SCPI-99 vol 2, SYSTem:ERRor: code 0 means the queue is empty
STANDBY_VERIFIED = [("OUTP OFF", None), (ERR, EMPTY), ("OUTP?", "0")]


class TestOutputGuardProtocol:
    def test_normal_exit_sends_standby_and_reads_back(self, expect):
        """Leaving the block normally sends standby and reads the output state back."""
        driver = Calibrator(
            expect([("OUTP ON", None), (ERR, EMPTY)] + STANDBY_VERIFIED), "scpi-generic"
        )
        with output_guard(driver) as guarded:
            guarded.output_on()

    def test_exception_in_block_still_sends_standby(self, expect):
        """An exception inside the block is re-raised after standby has been sent and verified."""
        driver = Calibrator(expect(STANDBY_VERIFIED), "scpi-generic")
        with pytest.raises(ZeroDivisionError):
            with output_guard(driver):
                1 / 0

    def test_failed_read_back_is_a_safety_error(self, expect):
        """If the output state cannot be read back, a SafetyError tells the operator to switch off
        by hand."""
        lost = ConnectionResetError(104, "Connection reset by peer")
        driver = Calibrator(
            expect([("OUTP OFF", None), (ERR, EMPTY), ("OUTP?", lost)]), "scpi-generic"
        )
        with pytest.raises(SafetyError) as err:
            with output_guard(driver):
                pass
        assert str(err.value).startswith(
            "output state unknown: switch the calibrator output off by hand"
        )
        assert err.value.command == "OUTP?"
        assert isinstance(err.value.__cause__, BenchError)

    def test_failed_standby_keeps_the_original_exception(self, expect):
        """When the block raised and standby then fails, the SafetyError carries the block's
        exception as its context."""
        lost = ConnectionResetError(104, "Connection reset by peer")
        driver = Calibrator(expect([("OUTP OFF", lost)]), "scpi-generic")
        with pytest.raises(SafetyError) as err:
            with output_guard(driver):
                raise KeyError("original")
        assert isinstance(err.value.__context__, KeyError)
        assert err.value.__cause__.command == "OUTP OFF"

    def test_standby_rejected_by_instrument(self, expect):
        """An error queued after the standby command is a SafetyError: the off command was not
        accepted."""
        driver = Calibrator(
            expect([("OUTP OFF", None), (ERR, '-100,"Command error"'), (ERR, EMPTY)]),
            "scpi-generic",
        )
        with pytest.raises(SafetyError, match="output state unknown") as err:
            with output_guard(driver):
                pass
        assert err.value.answer == '-100,"Command error"'

    def test_output_still_on_is_a_safety_error(self, expect):
        """If the output still reads on after standby, a SafetyError is raised even though every
        command succeeded."""
        driver = Calibrator(
            expect([("OUTP OFF", None), (ERR, EMPTY), ("OUTP?", "1")]), "scpi-generic"
        )
        with pytest.raises(SafetyError, match="still reads on"):
            with output_guard(driver):
                pass

    def test_keyboard_interrupt_during_standby(self, expect):
        """A second interrupt arriving during standby leaves the state unknown and says so."""
        driver = Calibrator(expect([("OUTP OFF", KeyboardInterrupt())]), "scpi-generic")
        with pytest.raises(SafetyError, match="interrupted") as err:
            with output_guard(driver):
                raise KeyboardInterrupt
        assert isinstance(err.value.__context__, KeyboardInterrupt)


class TestOutputGuardSimulated:
    def test_output_off_after_exception(self, sim):
        """After an exception with the output on, the simulated output reads off."""
        with pytest.raises(RuntimeError):
            with output_guard(sim):
                sim.source("dc-voltage", 100.0)
                sim.output_on()
                assert sim.output_is_on()
                raise RuntimeError("meter fell over")
        assert sim.resource.query("OUTP?") == "OFF"

    def test_output_off_after_keyboard_interrupt(self, sim):
        """A KeyboardInterrupt inside the block propagates, and the simulated output reads off
        afterwards."""
        with pytest.raises(KeyboardInterrupt):
            with output_guard(sim):
                sim.output_on()
                raise KeyboardInterrupt
        assert sim.resource.query("OUTP?") == "OFF"

    def test_output_off_after_normal_exit(self, sim):
        """Leaving the block normally leaves the simulated output off."""
        with output_guard(sim):
            sim.output_on()
        assert sim.resource.query("OUTP?") == "OFF"


class TestHazardLimits:
    def test_defaults(self):
        """The defaults are the hazardous-live levels 60 V DC, 30 V rms, 42.4 V peak
        (IEC 61010-1 6.3.1)."""
        assert HazardLimits() == HazardLimits(dc_volts=60.0, ac_rms_volts=30.0, ac_peak_volts=42.4)

    @pytest.mark.parametrize("field", ["dc_volts", "ac_rms_volts", "ac_peak_volts"])
    @pytest.mark.parametrize("value", [0.0, -1.0, math.inf, math.nan, True, "60"])
    def test_refuses_nonsense(self, field, value):
        """A limit that is not a positive finite number of volts is refused, naming the field."""
        with pytest.raises(ValueError, match=field):
            HazardLimits(**{field: value})

    def test_frozen(self):
        """Limits cannot be changed after they are made."""
        with pytest.raises(AttributeError):
            HazardLimits().dc_volts = 1000.0  # type: ignore[misc]


class TestIsHazardous:
    @pytest.mark.parametrize(
        "value, hazardous",
        [
            (59.999, False),
            (60.0, True),
            (-59.999, False),
            (-60.0, True),  # IEC 61010-1 6.3.1: 60 V DC
        ],
    )
    def test_dc(self, value, hazardous):
        """DC voltage is hazardous at or above 60 V in either polarity."""
        assert is_hazardous("dc-voltage", value) is hazardous

    @pytest.mark.parametrize(
        "value, hazardous",
        [
            (29.98, False),  # peak 42.398 V: under both limits
            (29.99, True),  # peak 42.412 V > 42.4 V peak (IEC 61010-1 6.3.1), though under 30 V rms
            (30.0, True),
        ],
    )
    def test_ac_checks_the_peak_too(self, value, hazardous):
        """AC voltage is hazardous when its rms or its sine peak (rms * sqrt 2) reaches the
        limit."""
        assert is_hazardous("ac-voltage", value) is hazardous

    def test_ac_rms_limit_alone(self):
        """With a generous peak limit, the rms limit still applies."""
        limits = HazardLimits(ac_peak_volts=1000.0)
        assert (
            is_hazardous("ac-voltage", 29.99, limits),
            is_hazardous("ac-voltage", 30.0, limits),
        ) == (False, True)

    def test_configurable(self):
        """Limits passed in replace the defaults."""
        limits = HazardLimits(dc_volts=25.0)
        assert (is_hazardous("dc-voltage", 30.0), is_hazardous("dc-voltage", 25.0, limits)) == (
            False,
            True,
        )

    @pytest.mark.parametrize("function", ["dc-current", "ac-current", "resistance"])
    def test_only_voltage_is_hazardous(self, function):
        """Current and resistance functions are never hazardous by this rule, however large the
        value."""
        assert is_hazardous(function, 1e6) is False

    @pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
    def test_non_finite_voltage_is_hazardous(self, value):
        """A voltage that is not a finite number is treated as hazardous."""
        assert is_hazardous("dc-voltage", value) and is_hazardous("ac-voltage", value)

    def test_unknown_function(self):
        """An unknown function name is refused, listing the known ones."""
        with pytest.raises(ValueError, match="unknown function 'volts'.*dc-voltage"):
            is_hazardous("volts", 1.0)


class TestSignalDuringStandby:
    def test_a_signal_arriving_during_standby_waits_until_it_is_read_back(self, monkeypatch):
        """A kill request that lands while the guard sends standby does not cut it short: the
        standby and its read-back finish, and the interrupt is delivered after, so the output
        state is known (no SafetyError)."""
        import os
        import signal

        def interrupt(signum, frame):
            raise KeyboardInterrupt("terminated")

        class Cal:
            def __init__(self):
                self.sent = []

            def standby(self):
                os.kill(os.getpid(), signal.SIGTERM)  # arrives in the middle of making safe
                self.sent.append("standby")

            def output_is_on(self):
                self.sent.append("read back")
                return False

        previous = signal.signal(signal.SIGTERM, interrupt)
        try:
            cal = Cal()
            with pytest.raises(KeyboardInterrupt):
                with output_guard(cal):
                    pass
        finally:
            signal.signal(signal.SIGTERM, previous)
        assert cal.sent == ["standby", "read back"]
