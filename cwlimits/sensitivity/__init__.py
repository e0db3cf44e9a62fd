"""Predicted strain sensitivity of a semi-coherent search, band by band.

:mod:`.model` builds the signal model of a setup (noise, response and template bank per
band, :func:`signal_model`) and solves it for the h0 a search detects at a given false-alarm
and detection probability (:func:`strain_sensitivity`, :func:`sensitivity_depth`).
"""

from cwlimits.sensitivity import model
from cwlimits.sensitivity.model import *  # noqa: F403

__all__ = [*model.__all__]
