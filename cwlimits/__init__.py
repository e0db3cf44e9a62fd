"""cwlimits: plan directed continuous-wave searches and turn their results into limits.

The package follows the job: target catalogues -> indirect limits -> noise and detector
response -> parameter space and computing cost -> sensitivity -> planning -> upper limits
-> reports, one subpackage per stage (``cwlimits.targets``, ``cwlimits.noise``,
``cwlimits.response``, ``cwlimits.searchspace``, ``cwlimits.statistics``,
``cwlimits.sensitivity``, ``cwlimits.planning``, ``cwlimits.limits``, ``cwlimits.pulsars``,
``cwlimits.simulation``, ``cwlimits.runtime``, ``cwlimits.plotting``, ``cwlimits.report``).
The names below are the ones a notebook needs; everything else is imported from its stage.
Everything takes and returns :class:`astropy.units.Quantity`.

Submodules and the names below are imported on first use (PEP 562), so ``import cwlimits``
costs milliseconds and ``cwlimits --help`` never loads the numerical stack.
"""

import importlib

#: Public name -> the module that defines it (PEP 562: imported on first use, so that
#: ``import cwlimits`` and the command line start without numpy, scipy or astropy).
_LAZY = {
    "Target": "targets.catalogue",
    "TargetCatalogue": "targets.catalogue",
    "load_targets": "targets.catalogue",
    "spindown_limit": "targets.indirect",
    "age_limit": "targets.indirect",
    "indirect_limits": "targets.indirect",
    "ellipticity": "targets.conversions",
    "rmode_amplitude": "targets.conversions",
    "get_noise": "noise",
    "band_psd": "noise",
    "get_detector": "response.antenna",
    "time_averages": "response.antenna",
    "orientation_factor_rule": "response.antenna",
    "SearchSetup": "searchspace.searchsetup",
    "load_setup": "searchspace.searchsetup",
    "count_templates": "searchspace.cost",
    "computing_cost": "searchspace.cost",
    "signal_model": "sensitivity.model",
    "strain_sensitivity": "sensitivity.model",
    "sensitivity_depth": "sensitivity.model",
    "plan_search": "planning.optimise",
    "rank_targets": "planning.optimise",
    "load_results": "limits.results",
    "upper_limits": "limits.upper",
    "targeted_sensitivity": "pulsars",
    "pulsar_posterior": "pulsars",
    "run_report": "report.chain",
    "read_table": "tables",
    "write_table": "tables",
    "CwlimitsError": "errors",
    "InputError": "errors",
    "CwlimitsWarning": "errors",
    "allow_large": "_sizes",
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
    # targets and indirect limits
    "Target",
    "TargetCatalogue",
    "load_targets",
    "spindown_limit",
    "age_limit",
    "indirect_limits",
    "ellipticity",
    "rmode_amplitude",
    # noise and detector response
    "get_noise",
    "band_psd",
    "get_detector",
    "time_averages",
    "orientation_factor_rule",
    # search setups and their cost
    "SearchSetup",
    "load_setup",
    "count_templates",
    "computing_cost",
    # sensitivity and planning
    "signal_model",
    "strain_sensitivity",
    "sensitivity_depth",
    "plan_search",
    "rank_targets",
    # results and upper limits
    "load_results",
    "upper_limits",
    # known pulsars
    "targeted_sensitivity",
    "pulsar_posterior",
    # the whole chain
    "run_report",
    # tables, errors and switches
    "read_table",
    "write_table",
    "CwlimitsError",
    "InputError",
    "CwlimitsWarning",
    "allow_large",
]
