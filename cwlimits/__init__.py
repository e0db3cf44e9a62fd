"""cwlimits: plan directed continuous-wave searches and turn their results into limits.

The package follows the job: target catalogues -> indirect limits -> noise and detector
response -> parameter space and computing cost -> sensitivity -> planning -> upper limits
-> reports.  The names below are the public API; everything takes and returns
:class:`astropy.units.Quantity`.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("cwlimits")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0+unknown"

from ._sizes import allow_large  # noqa: E402
from .conversions import (  # noqa: E402
    ellipticity,
    mass_quadrupole,
    rmode_amplitude,
    strain_from_ellipticity,
    strain_from_rmode_amplitude,
)
from .cost import (  # noqa: E402
    CostEstimate,
    computing_cost,
    count_templates,
    scan_cost,
)
from .detection import (  # noqa: E402
    QuadratureRule,
    combine_rules,
    critical_depth,
    detection_probability,
    estimate_sensitivity,
    false_alarm_threshold,
    marginal_likelihood,
    solve_amplitude,
)
from .errors import (  # noqa: E402
    CatalogueError,
    ComputationError,
    ConfigError,
    CwlimitsError,
    CwlimitsWarning,
    InputError,
    OutOfRangeError,
    SizeLimitError,
    TableError,
    UnitsMismatchError,
)
from .executor import make_executor, map_chunks, named_seed  # noqa: E402
from .fiducial import DEFAULT_MOMENT_OF_INERTIA, FIDUCIAL_RMODE_STAR  # noqa: E402
from .fstat import (  # noqa: E402
    estimate_amplitudes,
    expected_rho2,
    measure_unit_costs,
    noise_levels,
    stackslide_fstat,
)
from .indirect import (  # noqa: E402
    MASS_QUADRUPOLE,
    R_MODE,
    age_limit,
    indirect_limits,
    limit_range,
    rmode_age_limit,
    rmode_spindown_limit,
    sample_limits,
    spindown_limit,
)
from .lattices import Lattice, nearest_template, sample_mismatch  # noqa: E402
from .limits import band_posterior, sample_band, upper_limits  # noqa: E402
from .metric import coherent_metric, refinement_factors, semicoherent_metric  # noqa: E402
from .noise import (  # noqa: E402
    DEFAULT_NOISE_MODEL,
    NOISE_MODELS,
    band_floor,
    band_psd,
    combine_noise,
    estimate_psd,
    get_noise,
    read_noise_file,
    read_timeseries,
)
from .parameter_space import AgeBasedSpace, BoxSpace  # noqa: E402
from .planning import (  # noqa: E402
    PowerLawModel,
    Ranking,
    SearchPlan,
    allocate_budget,
    optimise_setup,
    plan_search,
    rank_targets,
)
from .pulsars import pulsar_posterior, targeted_sensitivity  # noqa: E402
from .response import (  # noqa: E402
    Detector,
    antenna_patterns,
    get_detector,
    load_detectors,
    orientation_factor,
    orientation_factor_rule,
    orientation_factor_samples,
    time_averages,
)
from .results import SearchResults, load_results  # noqa: E402
from .sensitivity import (  # noqa: E402
    SignalModel,
    sensitivity_depth,
    signal_model,
    strain_sensitivity,
)
from .setup import SearchSetup, load_setup  # noqa: E402
from .store import ResultStore, config_hash, file_hash, open_store  # noqa: E402
from .synthetic import (  # noqa: E402
    BandData,
    CWSignal,
    heterodyne,
    inject,
    simulate_noise,
    simulate_real_noise,
    simulate_signal,
)
from .tables import read_table, write_table  # noqa: E402
from .targets import Target, TargetCatalogue, load_targets  # noqa: E402
from .validation import CampaignResult, injection_campaign  # noqa: E402

__all__ = [
    "__version__",
    # targets
    "Target",
    "TargetCatalogue",
    "load_targets",
    # indirect limits
    "DEFAULT_MOMENT_OF_INERTIA",
    "MASS_QUADRUPOLE",
    "R_MODE",
    "spindown_limit",
    "age_limit",
    "rmode_spindown_limit",
    "rmode_age_limit",
    "limit_range",
    "sample_limits",
    "indirect_limits",
    # conversions
    "FIDUCIAL_RMODE_STAR",
    "ellipticity",
    "strain_from_ellipticity",
    "mass_quadrupole",
    "rmode_amplitude",
    "strain_from_rmode_amplitude",
    # noise
    "DEFAULT_NOISE_MODEL",
    "NOISE_MODELS",
    "get_noise",
    "read_noise_file",
    "read_timeseries",
    "estimate_psd",
    "band_psd",
    "band_floor",
    "combine_noise",
    # detector response
    "Detector",
    "get_detector",
    "load_detectors",
    "antenna_patterns",
    "time_averages",
    "orientation_factor",
    "orientation_factor_samples",
    "orientation_factor_rule",
    # search setup, parameter space, metric, lattices, cost
    "SearchSetup",
    "load_setup",
    "AgeBasedSpace",
    "BoxSpace",
    "coherent_metric",
    "semicoherent_metric",
    "refinement_factors",
    "Lattice",
    "sample_mismatch",
    "nearest_template",
    "count_templates",
    "computing_cost",
    "CostEstimate",
    "scan_cost",
    # detection statistics and sensitivity
    "QuadratureRule",
    "combine_rules",
    "false_alarm_threshold",
    "detection_probability",
    "solve_amplitude",
    "critical_depth",
    "marginal_likelihood",
    "estimate_sensitivity",
    "SignalModel",
    "signal_model",
    "strain_sensitivity",
    "sensitivity_depth",
    # simulated data, the F-statistic, validation of the model
    "BandData",
    "CWSignal",
    "simulate_noise",
    "simulate_signal",
    "inject",
    "simulate_real_noise",
    "heterodyne",
    "stackslide_fstat",
    "estimate_amplitudes",
    "expected_rho2",
    "noise_levels",
    "measure_unit_costs",
    "injection_campaign",
    "CampaignResult",
    # planning
    "plan_search",
    "rank_targets",
    "SearchPlan",
    "Ranking",
    "allocate_budget",
    "optimise_setup",
    "PowerLawModel",
    # known pulsars
    "targeted_sensitivity",
    "pulsar_posterior",
    # upper limits
    "upper_limits",
    "band_posterior",
    "sample_band",
    # scale: executor and resumable results
    "map_chunks",
    "make_executor",
    "named_seed",
    "ResultStore",
    "open_store",
    "config_hash",
    "file_hash",
    # search results
    "SearchResults",
    "load_results",
    # tables
    "read_table",
    "write_table",
    # errors
    "CwlimitsError",
    "InputError",
    "CatalogueError",
    "TableError",
    "ConfigError",
    "UnitsMismatchError",
    "OutOfRangeError",
    "ComputationError",
    "SizeLimitError",
    "CwlimitsWarning",
    # size limits (README: "Size limits")
    "allow_large",
]
