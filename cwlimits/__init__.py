"""cwlimits: plan directed continuous-wave searches and turn their results into limits.

The package follows the job: target catalogues -> indirect limits -> noise and detector
response -> parameter space and computing cost -> sensitivity -> planning -> upper limits
-> reports.  The names below are the public API; everything takes and returns
:class:`astropy.units.Quantity`.

Submodules and the names below are imported on first use (PEP 562), so ``import cwlimits``
costs milliseconds and ``cwlimits --help`` never loads the numerical stack.
"""

import importlib

#: Public name -> the module that defines it (PEP 562: imported on first use, so that
#: ``import cwlimits`` and the command line start without numpy, scipy or astropy).
_LAZY = {
    "allow_large": "_sizes",
    "targeted_sensitivity": "pulsars",
    "pulsar_posterior": "pulsars",
    "CwlimitsWarning": "errors",
    "SizeLimitError": "errors",
    "ellipticity": "conversions",
    "mass_quadrupole": "conversions",
    "rmode_amplitude": "conversions",
    "strain_from_ellipticity": "conversions",
    "strain_from_rmode_amplitude": "conversions",
    "CostEstimate": "cost",
    "computing_cost": "cost",
    "count_templates": "cost",
    "scan_cost": "cost",
    "QuadratureRule": "detection",
    "combine_rules": "detection",
    "critical_depth": "detection",
    "detection_probability": "detection",
    "estimate_sensitivity": "detection",
    "false_alarm_threshold": "detection",
    "marginal_likelihood": "detection",
    "solve_amplitude": "detection",
    "CatalogueError": "errors",
    "ComputationError": "errors",
    "ConfigError": "errors",
    "CwlimitsError": "errors",
    "InputError": "errors",
    "OutOfRangeError": "errors",
    "TableError": "errors",
    "UnitsMismatchError": "errors",
    "make_executor": "executor",
    "map_chunks": "executor",
    "named_seed": "executor",
    "DEFAULT_MOMENT_OF_INERTIA": "fiducial",
    "FIDUCIAL_RMODE_STAR": "fiducial",
    "estimate_amplitudes": "fstat",
    "expected_rho2": "fstat",
    "measure_unit_costs": "fstat",
    "noise_levels": "fstat",
    "stackslide_fstat": "fstat",
    "MASS_QUADRUPOLE": "indirect",
    "R_MODE": "indirect",
    "age_limit": "indirect",
    "indirect_limits": "indirect",
    "limit_range": "indirect",
    "rmode_age_limit": "indirect",
    "rmode_spindown_limit": "indirect",
    "sample_limits": "indirect",
    "spindown_limit": "indirect",
    "Lattice": "lattices",
    "nearest_template": "lattices",
    "sample_mismatch": "lattices",
    "band_posterior": "limits",
    "sample_band": "limits",
    "upper_limits": "limits",
    "coherent_metric": "metric",
    "refinement_factors": "metric",
    "semicoherent_metric": "metric",
    "DEFAULT_NOISE_MODEL": "noise",
    "NOISE_MODELS": "noise",
    "band_floor": "noise",
    "band_psd": "noise",
    "combine_noise": "noise",
    "estimate_psd": "noise",
    "get_noise": "noise",
    "read_noise_file": "noise",
    "read_timeseries": "noise",
    "AgeBasedSpace": "parameter_space",
    "BoxSpace": "parameter_space",
    "PowerLawModel": "planning",
    "Ranking": "planning",
    "SearchPlan": "planning",
    "allocate_budget": "planning",
    "optimise_setup": "planning",
    "plan_search": "planning",
    "rank_targets": "planning",
    "Detector": "response",
    "antenna_patterns": "response",
    "get_detector": "response",
    "load_detectors": "response",
    "orientation_factor": "response",
    "orientation_factor_rule": "response",
    "orientation_factor_samples": "response",
    "time_averages": "response",
    "SearchResults": "results",
    "load_results": "results",
    "SignalModel": "sensitivity",
    "sensitivity_depth": "sensitivity",
    "signal_model": "sensitivity",
    "strain_sensitivity": "sensitivity",
    "SearchSetup": "setup",
    "load_setup": "setup",
    "ResultStore": "store",
    "config_hash": "store",
    "file_hash": "store",
    "open_store": "store",
    "BandData": "synthetic",
    "CWSignal": "synthetic",
    "heterodyne": "synthetic",
    "inject": "synthetic",
    "simulate_noise": "synthetic",
    "simulate_real_noise": "synthetic",
    "simulate_signal": "synthetic",
    "read_table": "tables",
    "write_table": "tables",
    "Target": "targets",
    "TargetCatalogue": "targets",
    "load_targets": "targets",
    "CampaignResult": "validation",
    "injection_campaign": "validation",
}


def _version():
    """The installed distribution's version (importlib.metadata; the package not imported)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("cwlimits")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0+unknown"


def __getattr__(name):
    if name == "__version__":
        value = globals()["__version__"] = _version()
        return value
    module = _LAZY.get(name)
    if module is None:
        if not name.startswith("_"):
            # a submodule (``cwlimits.response``), as the eager imports used to provide
            try:
                return importlib.import_module(f".{name}", __name__)
            except ModuleNotFoundError as exc:
                if exc.name != f"{__name__}.{name}":
                    raise
        raise AttributeError(f"module 'cwlimits' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY) | {"__version__"})


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
