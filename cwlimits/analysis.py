"""The whole job, from a target catalogue to a report (``cwlimits report`` and ``demo``).

:func:`run_report` runs the chain on an :class:`~cwlimits.config.AnalysisConfig`:

1. indirect limits of every target;
2. ranking of the targets and the split of the computing budget (or a fixed setup);
3. the plan of each chosen target and its predicted sensitivity per band;
4. where search results are supplied, the frequentist or Bayesian strain limits and the
   ellipticity and r-mode limits;

and writes into the output folder a self-contained ``index.html`` with every figure (PNG
and SVG) and table (CSV and ECSV) and a run record (resolved configuration, package
versions, seed, input hashes) that reruns the same report exactly.  Every step calls the
same public functions as the individual commands, so the numbers are theirs.
"""

import astropy.units as u
import numpy as np

from .cost import computing_cost, scan_cost
from .indirect import indirect_limits
from .noise import get_noise
from .report import Report, file_sha256
from .sensitivity import strain_sensitivity
from .setup import load_setup
from .targets import load_targets

__all__ = ["run_report", "CAUTION"]

CAUTION = ("Every number in this report is an upper limit or a predicted sensitivity under "
           "the stated assumptions (moment of inertia, distance and age priors, braking-"
           "index range, Gaussian stationary noise), not a detection claim.")


def _subset(catalogue, names):
    if not names:
        return catalogue, list(catalogue.names)
    return catalogue, list(names)


def run_report(config, *, echo=print, progress=None, simulated=None):
    """Run the analysis of ``config`` and write its report; return the report folder.

    Parameters
    ----------
    config : AnalysisConfig
    echo : callable
        Receives one line of text per step (``print`` by default).
    progress : callable, optional
        ``progress(n)`` is called after each finished step.
    simulated : dict, optional
        Target name -> search results (:class:`~cwlimits.results.SearchResults`) made up
        by the caller (the demo), used like supplied results and labelled simulated.
    """
    progress = progress or (lambda n=1: None)
    seed = config["seed"]
    rng = np.random.default_rng(seed)
    catalogue = load_targets(config["catalogue.path"])
    _, names = _subset(catalogue, config["catalogue.targets"])
    noise = get_noise(config["noise.model"])
    inertia = config["indirect.moment_of_inertia"]
    indirect = indirect_limits(catalogue, config["indirect.braking_index"], inertia,
                               rng=rng.integers(2**32))
    keep = np.isin(indirect["name"], names)
    indirect = indirect[keep]
    echo(f"indirect limits of {len(indirect)} targets")
    progress()

    plans = _plans(config, catalogue, names, noise, echo)
    progress()

    sensitivities = {}
    for name, setup in plans.items():
        target = catalogue.target(name)
        sensitivities[name] = strain_sensitivity(
            setup, noise, target=target, confidence=config["statistics.confidence"],
            false_alarm=config["statistics.false_alarm"], start=config["data.start"])
        echo(f"predicted sensitivity of {name}: {len(sensitivities[name])} bands")
    progress()

    out = config["output"]
    title = config["title"]
    with Report(title, out) as rep:
        rep.section("About this report", CAUTION, caution=True)
        if simulated:
            rep.section("Simulated search results",
                        "The search results in this report are SIMULATED from the noise "
                        "distribution with a fixed seed; they are not the output of a "
                        "real search.", caution=True)
        _indirect_section(rep, indirect)
        _plan_sections(rep, config, catalogue, plans, sensitivities, noise)
        rep.assumptions(_assumptions(config), heading="Assumptions of the whole analysis")
        record = {"configuration": config.resolved(), "seed": seed,
                  "inputs": {role: {"path": str(path), "sha256": file_sha256(path)}
                             for role, path in config.input_files().items()}}
        folder = rep.write(record)
    progress()
    return folder


def _plans(config, catalogue, names, noise, echo):
    """The setup of each target that gets a search: a fixed setup for the first targets."""
    if config["search.setup"] is not None:
        setup = load_setup(config["search.setup"])
        chosen = names[: config["planning.max_targets"]]
        echo(f"fixed setup {config['search.setup']} for {', '.join(chosen)}")
        return {name: setup for name in chosen}
    raise NotImplementedError("planning arrives with issue 7")


def _indirect_section(rep, table):
    from .plots import plot_indirect_limits

    rep.section("Indirect limits",
                "Age-based limits on h0 for every target at its nominal distance and "
                "age, with the optimistic (nearest, youngest) and pessimistic (farthest, "
                "oldest) ends of the catalogue ranges, and the spin-down limit where the "
                "spin is known.")
    rep.table("indirect_limits", table, caption="Indirect limits per target")
    rep.figure("indirect_limits", plot_indirect_limits(table),
               caption="Indirect limits on h0 per target; bars span the catalogue ranges "
                       "of distance and age")


def _slug(name):
    keep = "".join(c if c.isalnum() else "_" for c in name).strip("_")
    return keep.lower() or "target"


def _plan_sections(rep, config, catalogue, plans, sensitivities, noise):
    from .plots import plot_sensitivity

    for name, setup in plans.items():
        target = catalogue.target(name)
        slug = _slug(name)
        table = sensitivities[name]
        cost = computing_cost(setup, target)
        rep.section(f"Search of {name}",
                    f"{setup.n_seg} segments of {setup.t_seg.to(u.day):.4g}, band "
                    f"{setup.f_min:.4g} to {setup.f_max:.4g}, detectors "
                    f"{', '.join(setup.detectors)}; computing cost "
                    f"{cost.total.to(u.h).value:.3g} core-hours.")
        rep.table(f"sensitivity_{slug}", table,
                  caption=f"Predicted sensitivity per band for {name}")
        rep.figure(f"sensitivity_{slug}", plot_sensitivity(table, title=name),
                   caption=f"Predicted h0 sensitivity of the search of {name} against its "
                           "age-based limit")
        scan = _cost_scan(setup, target)
        if scan is not None:
            rep.figure(f"cost_scan_{slug}", _plot_cost_scan(scan, setup, name),
                       caption=f"Computing cost against the segment length for {name}; "
                               "the chosen setup is marked")


def _cost_scan(setup, target):
    values = np.geomspace(setup.t_seg.to_value(u.day) / 4, setup.t_seg.to_value(u.day) * 4,
                          9) << u.day
    try:
        return scan_cost(setup.replace(mid_times=None), target, "t_seg", values)
    except Exception:  # a scan point outside the span: skip the figure, not the report
        return None


def _plot_cost_scan(scan, setup, name):
    from .plots import PALETTE, new_figure, tidy_log_axes

    fig, ax = new_figure()
    for k, (column, label) in enumerate((("cost", "total"), ("cost_coh", "coherent"),
                                         ("cost_semi", "semi-coherent"))):
        colour, style, marker = PALETTE[k]
        ax.plot(scan["t_seg"].to_value(u.day), scan[column].to_value(u.h), ls=style,
                marker=marker, ms=3, color=colour, label=label)
    ax.axvline(setup.t_seg.to_value(u.day), color="0.3", ls=":", lw=1,
               label="chosen segment length")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("coherent segment length [d]")
    ax.set_ylabel("computing cost [core-hours]")
    ax.legend(fontsize=6)
    ax.set_title(name, fontsize=8)
    tidy_log_axes(ax)
    return fig


def _assumptions(config):
    inertia = config["indirect.moment_of_inertia"]
    return {
        "moment_of_inertia": f"{inertia.to_value(u.kg * u.m**2):.4g} kg m^2",
        "distance_and_age": "catalogue values; ranges give optimistic and pessimistic "
                            "limits; priors uniform in distance, log-uniform in age",
        "braking_index": f"{config['indirect.braking_index']:g} for the age-based limit; "
                         "the searched spin-down range follows the setup's braking-index "
                         "range",
        "noise": f"Gaussian and stationary; {config['noise.model']}",
        "statistics": f"false alarm {config['statistics.false_alarm']:g} per band, "
                      f"confidence {config['statistics.confidence']:g}",
        "meaning": "upper limits and predictions, not detection claims",
    }
