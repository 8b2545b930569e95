"""verirun: declarative verification runs of electrical meters against a calibrator."""

__version__ = "0.1.0"
