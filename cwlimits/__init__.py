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
    "ellipticity": "targets.conversions",
    "mass_quadrupole": "targets.conversions",
    "rmode_amplitude": "targets.conversions",
    "strain_from_ellipticity": "targets.conversions",
    "strain_from_rmode_amplitude": "targets.conversions",
    "CostEstimate": "searchspace.cost",
    "computing_cost": "searchspace.cost",
    "count_templates": "searchspace.cost",
    "scan_cost": "searchspace.cost",
    "QuadratureRule": "statistics.detection",
    "combine_rules": "statistics.detection",
    "critical_depth": "statistics.detection",
    "detection_probability": "statistics.detection",
    "estimate_sensitivity": "statistics.detection",
    "false_alarm_threshold": "statistics.detection",
    "marginal_likelihood": "statistics.detection",
    "solve_amplitude": "statistics.detection",
    "CatalogueError": "errors",
    "ComputationError": "errors",
    "ConfigError": "errors",
    "CwlimitsError": "errors",
    "InputError": "errors",
    "OutOfRangeError": "errors",
    "TableError": "errors",
    "UnitsMismatchError": "errors",
    "make_executor": "runtime.executor",
    "map_chunks": "runtime.executor",
    "named_seed": "runtime.executor",
    "DEFAULT_MOMENT_OF_INERTIA": "targets.fiducial",
    "FIDUCIAL_RMODE_STAR": "targets.fiducial",
    "estimate_amplitudes": "simulation.fstat",
    "expected_rho2": "simulation.fstat",
    "measure_unit_costs": "simulation.fstat",
    "noise_levels": "simulation.fstat",
    "stackslide_fstat": "simulation.fstat",
    "MASS_QUADRUPOLE": "targets.indirect",
    "R_MODE": "targets.indirect",
    "age_limit": "targets.indirect",
    "indirect_limits": "targets.indirect",
    "limit_range": "targets.indirect",
    "rmode_age_limit": "targets.indirect",
    "rmode_spindown_limit": "targets.indirect",
    "sample_limits": "targets.indirect",
    "spindown_limit": "targets.indirect",
    "Lattice": "searchspace.lattices",
    "nearest_template": "searchspace.lattices",
    "sample_mismatch": "searchspace.lattices",
    "band_posterior": "limits.upper",
    "sample_band": "limits.upper",
    "upper_limits": "limits.upper",
    "coherent_metric": "searchspace.metric",
    "refinement_factors": "searchspace.metric",
    "semicoherent_metric": "searchspace.metric",
    "DEFAULT_NOISE_MODEL": "noise",
    "NOISE_MODELS": "noise",
    "band_floor": "noise",
    "band_psd": "noise",
    "combine_noise": "noise",
    "estimate_psd": "noise",
    "get_noise": "noise",
    "read_noise_file": "noise",
    "read_timeseries": "noise",
    "AgeBasedSpace": "searchspace.parameter_space",
    "BoxSpace": "searchspace.parameter_space",
    "PowerLawModel": "planning.optimise",
    "Ranking": "planning.optimise",
    "SearchPlan": "planning.optimise",
    "allocate_budget": "planning.optimise",
    "optimise_setup": "planning.optimise",
    "plan_search": "planning.optimise",
    "rank_targets": "planning.optimise",
    "Detector": "response.antenna",
    "antenna_patterns": "response.antenna",
    "get_detector": "response.antenna",
    "load_detectors": "response.antenna",
    "orientation_factor": "response.antenna",
    "orientation_factor_rule": "response.antenna",
    "orientation_factor_samples": "response.antenna",
    "time_averages": "response.antenna",
    "SearchResults": "limits.results",
    "load_results": "limits.results",
    "SignalModel": "sensitivity.model",
    "sensitivity_depth": "sensitivity.model",
    "signal_model": "sensitivity.model",
    "strain_sensitivity": "sensitivity.model",
    "SearchSetup": "searchspace.searchsetup",
    "load_setup": "searchspace.searchsetup",
    "ResultStore": "runtime.store",
    "config_hash": "runtime.store",
    "file_hash": "runtime.store",
    "open_store": "runtime.store",
    "BandData": "simulation.synthetic",
    "CWSignal": "simulation.synthetic",
    "heterodyne": "simulation.synthetic",
    "inject": "simulation.synthetic",
    "simulate_noise": "simulation.synthetic",
    "simulate_real_noise": "simulation.synthetic",
    "simulate_signal": "simulation.synthetic",
    "read_table": "tables",
    "write_table": "tables",
    "Target": "targets.catalogue",
    "TargetCatalogue": "targets.catalogue",
    "load_targets": "targets.catalogue",
    "CampaignResult": "simulation.campaigns",
    "injection_campaign": "simulation.campaigns",
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
            # a submodule (``cwlimits.response.antenna``), as the eager imports used to provide
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
    # size limits (docs: "Size limits")
    "allow_large",
]
