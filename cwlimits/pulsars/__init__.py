"""Known pulsars: emission models, targeted and narrow-band sensitivity, posteriors.

A known pulsar is a catalogue row with a measured spin (``f_rot``, ``fdot_rot``).  This
subpackage follows the job for such a star: which frequencies its spin implies
(:mod:`.emission`), how sensitive a targeted or narrow-band search of a setup is
(:mod:`.expected`), the band-limited data it is run on (:mod:`.data`) and the Bayesian
upper limit from them (:mod:`.posterior`).  Figures are in :mod:`cwlimits.plotting.pulsars`.
"""

from cwlimits.pulsars.data import (
    DownConvertedData,
    add_noise,
    read_down_converted,
    simulate_pulsar_signal,
    write_down_converted,
)
from cwlimits.pulsars.dual import DualHarmonicPosterior, dual_harmonic_posterior, dual_limit_table
from cwlimits.pulsars.emission import (
    DUAL_HARMONIC,
    RMODE,
    SINGLE_HARMONIC,
    EmissionModel,
    get_emission,
    harmonics,
)
from cwlimits.pulsars.expected import targeted_sensitivity
from cwlimits.pulsars.grid import OrientationPrior
from cwlimits.pulsars.narrowband import NarrowBandLimit, narrow_band_limit
from cwlimits.pulsars.posterior import (
    PulsarPosterior,
    limit_table,
    pulsar_posterior,
    spindown_ratios,
)
from cwlimits.pulsars.summary import known_pulsar_summary, sensitivity_curve

__all__ = ["EmissionModel", "SINGLE_HARMONIC", "DUAL_HARMONIC", "RMODE", "get_emission",
           "harmonics", "targeted_sensitivity", "OrientationPrior", "DownConvertedData",
           "read_down_converted", "write_down_converted", "simulate_pulsar_signal",
           "add_noise", "pulsar_posterior", "PulsarPosterior", "limit_table",
           "spindown_ratios", "known_pulsar_summary", "sensitivity_curve",
           "narrow_band_limit", "NarrowBandLimit", "dual_harmonic_posterior",
           "DualHarmonicPosterior", "dual_limit_table"]
