"""Planner for spectrophotometric equilibrium-constant experiments."""

__version__ = "0.1.0"
