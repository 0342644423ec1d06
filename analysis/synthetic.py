"""Synthetic data with known ground truth: hot-stage time-lapse stacks and DSC isotherms.

Public API (re-exported here): :func:`simulate_dsc_isotherm`, :func:`write_dsc_csv`,
:class:`DscIsotherm`.
"""

from __future__ import annotations

from .synthetic_dsc import DscIsotherm, simulate_dsc_isotherm, write_dsc_csv

__all__ = ["DscIsotherm", "simulate_dsc_isotherm", "write_dsc_csv"]
