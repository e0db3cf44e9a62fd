"""A correction of the lattice mismatch of the sensitivity model, fitted to mock searches.

The sensitivity model (:mod:`cwlimits.sensitivity.model`) draws the mismatch of a signal at
a random place relative to the coherent and semicoherent lattices from the quadratic phase
metric (:func:`cwlimits.searchspace.lattices.sample_mismatch`) and adds the two draws
(Prix & Shaltev 2012, arXiv:1201.4321, Sect. 3; from memory).  The mock-search campaigns of
``benchmarks/mock_validation.py`` (docs/validation.md) measure the mismatch of the loudest
template of an actual search two to three times below those draws for segments of hours.
Three known effects are behind it:

1. **The quadratic metric overestimates large mismatches**: the true loss of 2F saturates
   at 1 where the quadratic form grows without bound (Wette & Prix 2013, arXiv:1310.5587,
   from memory).  We use the *spherical ansatz* of Allen 2019 (arXiv:1906.01352, from
   memory): the mismatch is ``sin^2(sqrt(mu_q))`` for a quadratic mismatch ``mu_q <= pi^2/4``
   and 1 beyond, which equals ``mu_q`` to first order.  For a frequency offset in one
   segment it is within 0.035 of the exact loss ``1 - sinc^2`` up to ``mu_q = 1``, where the
   quadratic form is off by 0.37 (tests/test_mismatch_correction.py).
2. **The F-statistic metric lies below the phase metric for segments of a day or less**:
   the maximisation over the four amplitudes absorbs part of a phase offset through the
   daily amplitude modulation (Prix 2007, gr-qc/0606088, from memory).  The quadratic
   mismatch is scaled by ``kappa(T) = 1 - (1 - KAPPA_SHORT) exp(-T / T_KAPPA)`` with T the
   segment length in sidereal days: ``kappa -> 1`` (the phase metric) for T much longer than
   a day.  The form is ours, the simplest with those two limits.
3. **The coherent and semicoherent mismatches do not add**: a StackSlide template takes the
   nearest coherent template of each segment, and the semicoherent stage recovers part of the
   coherent loss, so the sum is an upper bound.  The semicoherent draw enters with the
   weight ``SEMI_WEIGHT``.

Corrected mismatch, per draw::

    mu = sin^2( sqrt( min( kappa(T) (mu_coh + SEMI_WEIGHT mu_semi), pi^2 / 4 ) ) )

The three constants are fitted by ``benchmarks/mismatch_fit.py`` to the measured
loudest-template mismatches of six campaigns (N = 1, 4, 16 segments of 12, 6, 3 hours; cubic
and covering lattices; maximum mismatches 0.1-0.5; with and without gaps; two spin
parameters), where the procedure and its residuals are documented.  Outside the fitted
segment lengths (3-12 hours) the correction is an extrapolation that tends to the spherical
ansatz of the quadratic sum for long segments.  The model uses it by default
(``mismatch='distribution'``); ``mismatch='quadratic'`` (``--mismatch quadratic``) is the
uncorrected sum of the quadratic draws.
"""

import astropy.units as u
import numpy as np

from cwlimits.errors import InputError

__all__ = ["KAPPA_SHORT", "T_KAPPA", "SEMI_WEIGHT", "metric_scale", "spherical_mismatch",
           "corrected_mismatch", "CORRECTION_TEXT"]

#: kappa for segments much shorter than a sidereal day (fitted, benchmarks/mismatch_fit.py).
KAPPA_SHORT = 0.132
#: Scale of the approach of kappa to 1, in sidereal days (fitted, benchmarks/mismatch_fit.py).
T_KAPPA = 1.131
#: Weight of the semicoherent quadratic draw in the sum (fitted, benchmarks/mismatch_fit.py).
SEMI_WEIGHT = 1.211

#: The sidereal day (s, astropy's ``sday``), the time scale of the antenna patterns.
SIDEREAL_DAY_S = float((1 * u.sday).to_value(u.s))

#: One-line description for the model's assumptions.
CORRECTION_TEXT = ("corrected for the mock-search campaigns (cwlimits.sensitivity."
                   "mismatch_correction: spherical ansatz of Allen 2019, F-statistic scale "
                   "kappa(T_seg), semicoherent weight)")


def metric_scale(t_seg_s, kappa_short=KAPPA_SHORT, t_kappa=T_KAPPA):
    """The F-statistic scale ``kappa(T)`` of the quadratic mismatch.

    Parameters
    ----------
    t_seg_s : float or array_like
        Segment length (s), > 0.
    kappa_short, t_kappa : float
        The constants of the form (default the fitted ones).

    Returns
    -------
    ndarray
        ``1 - (1 - kappa_short) exp(-T / (t_kappa sidereal days))``, in (0, 1].
    """
    t = np.asarray(t_seg_s, float)
    if np.any(~(t > 0)):
        raise InputError("the segment length must be > 0 s", value=t_seg_s)
    return 1.0 - (1.0 - kappa_short) * np.exp(-t / (t_kappa * SIDEREAL_DAY_S))


def spherical_mismatch(mu_quadratic):
    """The spherical ansatz ``sin^2(sqrt(mu_q))`` of a quadratic mismatch, 1 past pi^2/4.

    Parameters
    ----------
    mu_quadratic : float or array_like
        Quadratic (metric) mismatch, >= 0.

    Returns
    -------
    ndarray
        In [0, 1]; equals ``mu_q - mu_q^2 / 3 + ...`` for small ``mu_q``.

    References
    ----------
    B. Allen 2019, "Spherical ansatz for parameter-space metrics", arXiv:1906.01352 (from
    memory).
    """
    mu = np.asarray(mu_quadratic, float)
    if np.any(~(mu >= 0)):
        raise InputError("a quadratic mismatch must be >= 0", value=mu_quadratic)
    return np.sin(np.sqrt(np.minimum(mu, np.pi**2 / 4))) ** 2


def corrected_mismatch(mu_coherent, mu_semicoherent, t_seg, *, kappa_short=KAPPA_SHORT,
                       t_kappa=T_KAPPA, semi_weight=SEMI_WEIGHT):
    """The corrected StackSlide mismatch of quadratic-metric draws of the two stages.

    Parameters
    ----------
    mu_coherent, mu_semicoherent : array_like
        Quadratic-metric mismatch draws of the coherent and semicoherent lattices (the
        second zero for a fully coherent search); broadcast together.
    t_seg : Quantity ['time']
        Segment length.
    kappa_short, t_kappa, semi_weight : float
        The constants (default the fitted ones; the benchmark fit passes its trial values).

    Returns
    -------
    ndarray
        Mismatch in [0, 1].

    Examples
    --------
    >>> import astropy.units as u
    >>> round(float(corrected_mismatch(0.3, 0.0, 1000 * u.day)), 4)  # long T: sin^2(sqrt(0.3))
    0.2712
    """
    t_s = float(u.Quantity(t_seg).to_value(u.s))
    q = metric_scale(t_s, kappa_short, t_kappa) * (np.asarray(mu_coherent, float)
                                                   + semi_weight * np.asarray(mu_semicoherent,
                                                                              float))
    return spherical_mismatch(q)
