"""Analytic design-noise fits of ground-based detectors, selectable by a short name.

Each fit is the published analytic approximation S_h(f) = S0 * g(f/f0) of a design
sensitivity curve, valid above a low-frequency cutoff f_s where seismic noise makes the
detector blind (S_h = infinity).  None of the sources gives an upper limit; we cap every
fit at 10 kHz, beyond the band of ground-based continuous-wave searches, so that every
noise source has a finite range.

==================  =========================================  =========  =====  ==========
name                fit                                        f0         f_s    S0 [1/Hz]
==================  =========================================  =========  =====  ==========
second-gen-fit      second-generation 4 km design (default)    215 Hz     20 Hz  1e-49
first-gen-fit       first-generation 4 km design               150 Hz     40 Hz  9e-46
first-gen-3km-fit   first-generation 3 km design               500 Hz     20 Hz  10.2e-46
third-gen-fit       third-generation design                    200 Hz     1 Hz   1.449e-52
==================  =========================================  =========  =====  ==========

Names of earlier versions of cwlimits are refused with a message naming the new one.
"""

from __future__ import annotations

from cwlimits import _defaults
from cwlimits.errors import InputError
from cwlimits.noise._base import NoiseSource

__all__ = ["AnalyticNoise", "NOISE_MODELS", "DEFAULT_NOISE_MODEL", "noise_model"]

#: Upper end of every analytic fit (ours; the sources give none), in Hz.
_F_CAP_HZ = 1.0e4


class AnalyticNoise(NoiseSource):
    """A published analytic fit S_h(f) = S0 g(f/f0), defined for f_s <= f <= 10 kHz.

    Parameters
    ----------
    name : str
        Short name (a key of :data:`NOISE_MODELS`).
    shape : callable
        ``g(x)`` on a float array of x = f/f0.
    s0_per_hz, f0_hz, f_low_hz : float
        S0 in 1/Hz, the scale frequency f0 and the low-frequency cutoff f_s in Hz.
    title : str
        What the fit describes.
    reference : str
        Paper, arXiv id and equation.
    """

    def __init__(self, name, shape, s0_per_hz, f0_hz, f_low_hz, title, reference):
        super().__init__(name, f_low_hz, _F_CAP_HZ)
        self._shape, self.s0_per_hz, self.f0_hz = shape, float(s0_per_hz), float(f0_hz)
        self.title, self.reference = title, reference

    def _psd_hz(self, f_hz):
        return self.s0_per_hz * self._shape(f_hz / self.f0_hz)

    def describe(self) -> str:
        """One line: name, what it is, its range and its source."""
        return (f"{self.name}: analytic {self.title} fit, valid "
                f"{self._f_min_hz:g}-{self._f_max_hz:g} Hz ({self.reference})")


def _second_gen_shape(x):
    # Sathyaprakash & Schutz 2009, Living Rev. Relativ. 12, 2, arXiv:0903.0338 (Sec. 4,
    # table of noise fits) and Arun et al. 2005, gr-qc/0411146 (Sec. III); equation
    # numbers not checked against the papers.
    return x**-4.14 - 5.0 * x**-2 + 111.0 * (1.0 - x**2 + 0.5 * x**4) / (1.0 + 0.5 * x**2)


def _first_gen_shape(x):
    # Arun et al. 2005, gr-qc/0411146, Sec. III, first-generation 4 km fit (from memory);
    # also Sathyaprakash & Schutz 2009, arXiv:0903.0338, Sec. 4 (from memory).
    return (4.49 * x) ** -56 + 0.16 * x**-4.52 + 0.52 + 0.32 * x**2


def _first_gen_3km_shape(x):
    # Arun et al. 2005, gr-qc/0411146, Sec. III, first-generation 3 km fit (from memory); also
    # Sathyaprakash & Schutz 2009, arXiv:0903.0338, Sec. 4 (from memory).
    return (7.87 * x) ** -4.8 + (6.0 / 17.0) / x + 1.0 + x**2


# Third-generation fit coefficients of Mishra, Arun, Iyer & Sathyaprakash 2010, arXiv:1005.0304,
# Sec. II (from memory): S_h = S0 [x^p1 + a1 x^p2 + a2 P(x)/Q(x)].
_G3_P1, _G3_P2, _G3_A1, _G3_A2 = -4.05, -0.69, 185.62, 232.56
_G3_B = (31.18, -64.72, 52.24, -42.16, 10.17, 11.53)
_G3_C = (13.58, -36.46, 18.56, 27.43)


def _third_gen_shape(x):
    num = 1.0 + sum(b * x ** (k + 1) for k, b in enumerate(_G3_B))
    den = 1.0 + sum(c * x ** (k + 1) for k, c in enumerate(_G3_C))
    return x**_G3_P1 + _G3_A1 * x**_G3_P2 + _G3_A2 * num / den


#: The analytic fits by short name.
NOISE_MODELS = {
    "second-gen-fit": AnalyticNoise(
        "second-gen-fit", _second_gen_shape, 1e-49, 215.0, 20.0,
        "second-generation 4 km design",
        "Sathyaprakash & Schutz 2009, arXiv:0903.0338, Sec. 4; Arun et al. 2005, "
        "gr-qc/0411146, Sec. III"),
    "first-gen-fit": AnalyticNoise(
        "first-gen-fit", _first_gen_shape, 9e-46, 150.0, 40.0,
        "first-generation 4 km design",
        "Arun et al. 2005, gr-qc/0411146, Sec. III; coefficients from memory"),
    "first-gen-3km-fit": AnalyticNoise(
        "first-gen-3km-fit", _first_gen_3km_shape, 10.2e-46, 500.0, 20.0,
        "first-generation 3 km design",
        "Arun et al. 2005, gr-qc/0411146, Sec. III; coefficients from memory"),
    "third-gen-fit": AnalyticNoise(
        "third-gen-fit", _third_gen_shape, 1.449e-52, 200.0, 1.0,
        "third-generation design",
        "Mishra et al. 2010, arXiv:1005.0304, Sec. II; coefficients from memory"),
}

#: The model used when none is given (the embedded default of the demo).
DEFAULT_NOISE_MODEL = _defaults.DEFAULT_NOISE_MODEL

#: Model names of earlier versions and the names that replaced them.
_RETIRED_NOISE_MODELS = {"advanced-fit": "second-gen-fit", "initial-fit": "first-gen-fit"}


def noise_model(name: str) -> AnalyticNoise:
    """Return the analytic noise fit called ``name``.

    Parameters
    ----------
    name : str
        A key of :data:`NOISE_MODELS` (case-insensitive).

    Returns
    -------
    AnalyticNoise

    Raises
    ------
    InputError
        An unknown name; the message lists the known ones.
    """
    key = str(name).strip().lower()
    if key in _RETIRED_NOISE_MODELS:
        raise InputError(f"the noise model {name!r} was renamed: use "
                         f"'{_RETIRED_NOISE_MODELS[key]}'", value=name)
    if key not in NOISE_MODELS:
        raise InputError(f"unknown noise model; known models: {', '.join(NOISE_MODELS)}",
                         value=name)
    return NOISE_MODELS[key]

