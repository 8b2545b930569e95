"""The simulated calibrator: a pyvisa-sim device file and the VISA library string that loads it.

Simulation is only a different VISA backend: the driver opens ``sim_library()`` with the same
code as a real bench, so a dry run exercises everything but the hardware.
"""

from __future__ import annotations

import shutil
import tempfile
from importlib.resources import files
from pathlib import Path

#: The resource name the simulated calibrator answers on.
SIM_RESOURCE = "GPIB0::4::INSTR"

_DEVICE_FILE = "calibrator.yaml"


def sim_library(workdir: str | Path | None = None) -> str:
    """Return the VISA library string (``"<path>@sim"``) that opens the simulated calibrator.

    Parameters
    ----------
    workdir
        If given, the device file is first copied into this folder and the copy is used. The
        simulator keeps one device state per file for the life of the process, so a fresh copy
        is how a test or a run starts from power-on state.
    """
    packaged = files("verirun.bench.sim") / _DEVICE_FILE
    if workdir is None and isinstance(packaged, Path):
        return f"{packaged}@sim"
    # A copy is also needed when the package is not a plain folder (e.g. a zip): the simulator
    # reads a file path.
    folder = Path(workdir) if workdir is not None else Path(tempfile.mkdtemp(prefix="verirun-sim-"))
    folder.mkdir(parents=True, exist_ok=True)
    target = folder.resolve() / _DEVICE_FILE
    with packaged.open("rb") as source, target.open("wb") as copy:
        shutil.copyfileobj(source, copy)
    # The simulator needs a string path; a Path object is not accepted.
    return f"{target}@sim"


def is_simulator(visa_library: str) -> bool:
    """True when a VISA library string opens this simulator (pyvisa-sim's ``...@sim``): a bench
    reached through it is a dry run, never a calibration."""
    return visa_library.strip().endswith("@sim")
