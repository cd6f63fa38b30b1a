"""Numeric layer: the generated numpy functions of the derived equations (no sympy at run time)."""

from .model import Model, load_model

__all__ = ["Model", "load_model"]
