"""statherm: standard-state thermochemistry from molecular data.

Species files (YAML) → statistical mechanics on a temperature grid →
constrained seven-coefficient fits → fixed-column records, a structured
format, CSV tables and a report.
"""

__version__ = "0.1.0"
