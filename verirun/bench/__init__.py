"""The bench: the calibrator driver, its driver profiles, and the output-safety guard.

Nothing here imports pyvisa until a calibrator is opened, and nothing outside ``bench.sim``
knows that a simulator exists: the VISA library string alone chooses the backend.
"""

from verirun.bench.calibrator import Calibrator
from verirun.bench.profile import FUNCTIONS, DriverProfile, load_profile
from verirun.bench.safety import HazardLimits, is_hazardous, output_guard

__all__ = [
    "FUNCTIONS",
    "Calibrator",
    "DriverProfile",
    "HazardLimits",
    "is_hazardous",
    "load_profile",
    "output_guard",
]
