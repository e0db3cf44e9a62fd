"""Simulated data and searches, to check the sensitivity model against.

:mod:`.synthetic` simulates strain; :mod:`.fstat` computes the F-statistic and the StackSlide
sum on it; :mod:`.campaigns` runs injection campaigns and compares measured with predicted
h0; :mod:`.mocksearch` is the directed mock search of a setup (barycentric resampling,
lattice template banks, StackSlide).
"""

from .campaigns import (
    DEFAULT_CAMPAIGN_CHUNK,
    MAX_SAMPLES_PER_INJECTION,
    CampaignResult,
    injection_campaign,
    plot_efficiency,
    simulation_layout,
)
from .fstat import (
    AmplitudeEstimate,
    FstatResult,
    estimate_amplitudes,
    expected_rho2,
    invert_amplitudes,
    measure_unit_costs,
    noise_levels,
    stackslide_fstat,
)
from .mockcampaign import MockCampaignResult, mock_campaign, mock_layout
from .mocksearch import (
    BarycentricData,
    MockSearchResult,
    TemplateBank,
    demodulated_fstat,
    lattice_rows,
    mock_search,
    resample_to_barycentre,
    resampled_direct_fstat,
)
from .synthetic import (
    BandData,
    CWSignal,
    barycentric_delay,
    gap_mask,
    heterodyne,
    inject,
    simulate_noise,
    simulate_real_noise,
    simulate_real_signal,
    simulate_signal,
)

__all__ = [
    "CampaignResult",
    "injection_campaign",
    "simulation_layout",
    "plot_efficiency",
    "DEFAULT_CAMPAIGN_CHUNK",
    "MAX_SAMPLES_PER_INJECTION",
    "FstatResult",
    "AmplitudeEstimate",
    "noise_levels",
    "stackslide_fstat",
    "estimate_amplitudes",
    "invert_amplitudes",
    "expected_rho2",
    "measure_unit_costs",
    "BandData",
    "CWSignal",
    "simulate_noise",
    "simulate_signal",
    "inject",
    "simulate_real_noise",
    "simulate_real_signal",
    "heterodyne",
    "gap_mask",
    "barycentric_delay",
    "BarycentricData",
    "TemplateBank",
    "MockSearchResult",
    "resample_to_barycentre",
    "lattice_rows",
    "mock_search",
    "resampled_direct_fstat",
    "demodulated_fstat",
    "MockCampaignResult",
    "mock_campaign",
    "mock_layout",
]
