"""Predicted strain sensitivity of a semi-coherent search, band by band.

:mod:`.model` builds the signal model of a setup (noise, response and template bank per
band, :func:`signal_model`) and solves it for the h0 a search detects at a given false-alarm
and detection probability (:func:`strain_sensitivity`, :func:`sensitivity_depth`).
"""

from .model import (
    AGE_COMPARISON,
    DEFAULT_START,
    SignalModel,
    add_age_comparison,
    sensitivity_depth,
    signal_model,
    strain_sensitivity,
)

__all__ = [
    "AGE_COMPARISON",
    "DEFAULT_START",
    "add_age_comparison",
    "SignalModel",
    "signal_model",
    "strain_sensitivity",
    "sensitivity_depth",
]
