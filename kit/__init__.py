"""Rotorbook: attitude dynamics of multirotor vehicles, as workbooks and calculation records."""

__version__ = "0.1.0"
