"""returngap: return-current path checks on released PCB fabrication data.

Estimates, not measurements: every number it reports is an engineering estimate
to guide review, never a substitute for the board's own EMC test results.
"""

__version__ = "0.1.0"
