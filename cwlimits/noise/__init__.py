"""Detector noise: the strain power spectral density S_n(f) a search sees.

Every noise source -- an analytic design fit (:data:`NOISE_MODELS`), a tabulated file
(:func:`read_noise_file`), an estimate from a strain series (:func:`estimate_psd`) or a
data-time-weighted combination of detectors and stretches (:func:`combine_noise`) -- is a
:class:`NoiseSource` with ``.psd(f)``, ``.asd(f)``, ``.f_min``, ``.f_max``, ``.name`` and
``.describe()``.  :func:`band_psd` gives the effective (harmonic-mean) PSD of each band of
a grid, and :func:`get_noise` turns a model name or a file path into a source.
"""

from cwlimits.noise._base import NoiseSource, band_psd
from cwlimits.noise.bands import psd_table
from cwlimits.noise.combine import EffectiveNoise, combine_noise, estimate_stretches
from cwlimits.noise.estimate import (
    EstimatedNoise,
    band_floor,
    estimate_psd,
    median_bias,
    read_timeseries,
)
from cwlimits.noise.files import TabulatedNoise, read_noise_file
from cwlimits.noise.models import DEFAULT_NOISE_MODEL, NOISE_MODELS, AnalyticNoise, noise_model
from cwlimits.noise.resolve import get_noise
from cwlimits.plotting.noise import plot_asd

__all__ = [
    "NoiseSource",
    "AnalyticNoise",
    "TabulatedNoise",
    "EstimatedNoise",
    "EffectiveNoise",
    "NOISE_MODELS",
    "DEFAULT_NOISE_MODEL",
    "noise_model",
    "get_noise",
    "read_noise_file",
    "read_timeseries",
    "estimate_psd",
    "estimate_stretches",
    "band_floor",
    "band_psd",
    "psd_table",
    "median_bias",
    "combine_noise",
    "plot_asd",
]
