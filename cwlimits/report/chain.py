"""The whole job, from a target catalogue to a report (``cwlimits report`` and ``demo``).

:func:`run_report` runs the chain on an :class:`~cwlimits.report.config.AnalysisConfig`:

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

from __future__ import annotations

import logging
from dataclasses import replace
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from cwlimits import _defaults
from cwlimits.errors import ConfigError
from cwlimits.limits.results import load_results
from cwlimits.limits.upper import band_posterior, upper_limits
from cwlimits.noise import get_noise
from cwlimits.planning.optimise import rank_targets
from cwlimits.pulsars.data import read_detector_files
from cwlimits.report.html import Report, check_report_folder, file_sha256
from cwlimits.report.pulsars import known_pulsar_section
from cwlimits.report.validation import validation_section
from cwlimits.runtime.executor import named_seed
from cwlimits.searchspace.cost import computing_cost, scan_cost
from cwlimits.searchspace.searchsetup import load_setup
from cwlimits.sensitivity.model import (
    AGE_COMPARISON,
    add_age_comparison,
    signal_model,
    strain_sensitivity,
)
from cwlimits.targets.catalogue import load_targets
from cwlimits.targets.indirect import indirect_limits

if TYPE_CHECKING:
    from cwlimits._random import RngLike

_log = logging.getLogger("cwlimits.report")

__all__ = ["run_report", "simulate_results", "summary_table", "budget_account", "CAUTION",
           "STEPS", "MERIT_TEXT"]

#: What the ranking's figure of merit is (cwlimits.planning.optimise, measure 'integral').
MERIT_TEXT = ("The figure of merit of a target is the integral over frequency of "
              "max(0, ln(h_age / h0(f))) df, in Hz: h0(f) is the predicted sensitivity of "
              "its best search setup and sub-band at the budget, h_age its age-based limit "
              "in the ranking's distance and age case.  It grows with the width of the "
              "band where the search beats the limit and with how far below the limit it "
              "goes there (a band 1 Hz wide where h0 is h_age / e adds 1 Hz).")

CAUTION = ("Every number in this report is an upper limit or a predicted sensitivity under "
           "the stated assumptions (moment of inertia, distance and age priors, braking-"
           "index range, Gaussian stationary noise), not a detection claim.")


def run_report(config, *, echo=None, progress=None, simulate: bool = False,
               overwrite: bool = False, output_option=None):
    """Run the analysis of ``config`` and write its report; return the report folder.

    Parameters
    ----------
    config : AnalysisConfig
    echo : callable
        Receives one line of text per step; by default each line is logged at level INFO
        on the ``cwlimits.report`` logger (the library prints nothing itself).
    progress : callable, optional
        ``progress(n)`` is called after each finished step (:data:`STEPS` in all).
    simulate : bool
        Make up search results for every planned target from the noise distribution
        (:func:`simulate_results`, seeded from the configuration's seed), labelled as
        simulated; used by ``cwlimits demo``.
    overwrite : bool
        Add the report to an existing output folder that holds other files (only the
        files of its old cwlimits manifest are deleted); see :mod:`cwlimits.report.html`.
    output_option : str, optional
        How the user named the output folder, for error messages (default: the
        configuration key ``output`` of the configuration file).

    Raises
    ------
    InputError
        Before any work, if the output folder may not or cannot be written
        (:func:`cwlimits.report.html.check_report_folder`).
    """
    if echo is None:
        echo = _log.info
    progress = progress or (lambda n=1: None)
    # The output folder is checked first: a refused or unwritable one costs no work.
    check_report_folder(config["output"], overwrite,
                        output_option or f"key 'output' of {config.source}")
    seed = config["seed"]
    catalogue = load_targets(config["catalogue.path"])
    if config["catalogue.targets"]:
        catalogue = catalogue.select(config["catalogue.targets"])
    noise = get_noise(config["noise.model"])
    # the known pulsars' data files are read (and checked) before any work
    pulsar_data = {name: read_detector_files(files, detectors=config["data.detectors"])
                   for name, files in config["pulsars.data"].items()}
    indirect = indirect_limits(catalogue, config["indirect.braking_index"],
                               config["indirect.moment_of_inertia"],
                               rng=named_seed(seed, "indirect"))
    echo(f"indirect limits of {len(indirect)} targets")
    progress()

    ranking, plans = _plans(config, catalogue, noise, echo)
    progress()

    sensitivities = {}
    for name, plan in plans.items():
        sensitivities[name] = plan["table"] if plan["table"] is not None else \
            strain_sensitivity(plan["setup"], noise, target=plan["target"],
                               confidence=config["statistics.confidence"],
                               false_alarm=config["statistics.false_alarm"],
                               start=config["data.start"])
        # The plan was made for its case's distance and age; the tables compare with the
        # catalogue's nominal limit (and its range), as 'sensitivity' and 'limits' do.
        sensitivities[name] = sensitivities[name].copy()
        add_age_comparison(sensitivities[name], catalogue.target(name))
        echo(f"predicted sensitivity of {name}: {len(sensitivities[name])} bands")
    progress()

    results = {name: load_results(path) for name, path in config["results"].items()}
    if simulate:
        for name, plan in plans.items():
            model = signal_model(plan["setup"], noise, plan["target"],
                                 start=config["data.start"])
            results[name] = simulate_results(model, named_seed(seed, f"simulate:{name}"))
    limits = {}
    for name, res in results.items():
        if name not in plans:
            raise ConfigError(f"results for '{name}', which has no search setup in this "
                              "analysis (give search.setup, or raise planning.max_targets)",
                              file=str(config.source))
        limits[name] = upper_limits(
            res, plans[name]["setup"], plans[name]["target"], config["limits.method"],
            config["statistics.confidence"], rng=named_seed(seed, f"limits:{name}"),
            noise=noise, prior=config["limits.prior"],
            distance_prior=config["limits.distance_prior"],
            moment_of_inertia=config["indirect.moment_of_inertia"],
            start=config["data.start"])
        add_age_comparison(limits[name], catalogue.target(name), "h0_limit")
        echo(f"upper limits of {name}: {len(limits[name])} bands "
             f"({config['limits.method']})")
    progress()

    with Report(config["title"], config["output"], overwrite=overwrite) as rep:
        rep.section("About this report", CAUTION, caution=True)
        if simulate:
            rep.section("Simulated search results",
                        "The search results in this report are SIMULATED from the noise "
                        "distribution with a fixed seed; they are not the output of a "
                        "real search.", caution=True)
        summary = summary_table(indirect, ranking, plans, sensitivities, limits,
                                max_targets=config["planning.max_targets"])
        notes = []
        if ranking is not None:
            notes.append(_budget_text(budget_account(ranking, plans)))
        rep.summary("summary", summary, "One row per target: its indirect limit, the plan "
                    "chosen for it and its cost, the best predicted and measured limits, "
                    "and where the search beats the nominal age-based limit.", notes=notes)
        _indirect_section(rep, indirect, catalogue)
        if ranking is not None:
            _ranking_section(rep, ranking, plans)
        _plan_sections(rep, plans, sensitivities)
        if config["validation.injections"] > 0:
            validation_section(rep, plans, n_injections=config["validation.injections"],
                               seed=seed, confidence=config["statistics.confidence"],
                               false_alarm=config["statistics.false_alarm"], echo=echo)
        for name, table in limits.items():
            _limits_section(rep, config, plans[name]["target"], plans[name]["setup"],
                            results[name], table, noise, simulated=simulate,
                            sensitivity=sensitivities[name],
                            indirect=indirect[list(indirect["name"]).index(name)],
                            nominal=catalogue.target(name))
        known_pulsar_section(rep, catalogue, noise, span=config["data.span"],
                             detectors=tuple(config["data.detectors"]),
                             duty_factor=config["data.duty_factor"], start=config["data.start"],
                             confidence=config["statistics.confidence"], seed=seed,
                             simulate=simulate, data=pulsar_data, echo=echo,
                             predicted=_known_predictions(ranking))
        rep.assumptions(_assumptions(config, noise),
                        heading="Assumptions of the whole analysis")
        record = {"configuration": config.resolved(), "seed": seed,
                  "inputs": {role: {"path": str(path), "sha256": file_sha256(path)}
                             for role, path in config.input_files().items()}}
        folder = rep.write(record)
    progress()
    return folder


def _known_predictions(ranking):
    """The known pulsars' expected-limit tables the ranking computed (reused, not redone)."""
    if ranking is None:
        return {}
    return {name: plan.table for name, plan in ranking.known_plans.items()}


#: Steps of :func:`run_report` that call ``progress``.
STEPS = _defaults.REPORT_STEPS


def _plans(config, catalogue, noise, echo):
    """The setup of each target that gets a search: ranked and planned, or fixed.

    Returns
    -------
    ranking : Ranking or None
    plans : dict of name -> {"setup", "table", "plan"}
    """
    limit = config["planning.max_targets"]
    if config["search.setup"] is not None:
        setup = load_setup(config["search.setup"])
        chosen = catalogue.names[:limit]
        echo(f"fixed setup {config['search.setup']} for {', '.join(chosen)}")
        return None, {name: {"setup": setup, "table": None, "plan": None,
                             "target": catalogue.target(name)} for name in chosen}
    ranking = rank_targets(
        catalogue, noise, config["planning.budget"], config["data.span"],
        band=(config["search.f_min"], config["search.f_max"]),
        band_width=config["search.band_width"], detectors=tuple(config["data.detectors"]),
        duty_factor=config["data.duty_factor"], confidence=config["statistics.confidence"],
        false_alarm=config["statistics.false_alarm"], start=config["data.start"],
        case=config["planning.case"], budget_steps=config["planning.budget_steps"])
    plans = {}
    for name in ranking.table["name"]:
        # known pulsars have their own section (cwlimits.report.pulsars)
        if name in ranking.plans and len(plans) < limit and \
                ranking.plans[name].objective != "known-pulsar":
            plan = ranking.plans[name]
            # The plan was made for the case's distance and age (the age also sets the
            # searched parameter space), so everything about it uses that target.
            case_target = replace(catalogue.target(name), distance=plan.distance,
                                  age=plan.age)
            plans[name] = {"setup": plan.setup, "table": plan.table, "plan": plan,
                           "target": case_target}
    echo(f"ranked {len(catalogue)} targets; planned searches of "
         f"{', '.join(plans) or 'none'} within {config['planning.budget']:.4g}")
    return ranking, plans


def _indirect_section(rep, table, catalogue):
    from cwlimits.plotting.figures import plot_indirect_limits
    from cwlimits.plotting.sky import plot_sky_map

    rep.section("Indirect limits",
                "Age-based limits on h0 for every target at its nominal distance and "
                "age, with the optimistic (nearest, youngest) and pessimistic (farthest, "
                "oldest) ends of the catalogue ranges, and the spin-down limit where the "
                "spin is known.")
    rep.table("indirect_limits", table, caption="Indirect limits per target")
    rep.figure("indirect_limits", plot_indirect_limits(table),
               caption="Indirect limits on h0 per target; bars span the catalogue ranges "
                       "of distance and age")
    rep.figure("sky_map", plot_sky_map(catalogue.coord, table["h0_age"], catalogue.names,
                                       frame="galactic"),
               caption="The targets on the sky (Galactic coordinates, Mollweide "
                       "projection), coloured by the nominal age-based limit on h0")


def _slug(name):
    keep = "".join(c if c.isalnum() else "_" for c in name).strip("_")
    return keep.lower() or "target"


def _ranking_section(rep, ranking, plans):
    from cwlimits.plotting.planning import plot_merit_vs_budget, plot_planned_strain

    account = budget_account(ranking, plans)
    rep.section("Ranking and budget split", MERIT_TEXT,
                "The total budget is split across the targets by an exact dynamic "
                "programme over a grid of budgets that maximises the summed figure of "
                "merit (Notes of cwlimits.planning.optimise.rank_targets).",
                _budget_text(account))
    info = dict(ranking.assumptions)
    info["budget"] = _budget_text(account)
    rep.table("ranking", ranking.table, caption="Ranking of the targets", assumptions=info)
    rep.figure("merit_vs_budget", plot_merit_vs_budget(ranking),
               caption="Figure of merit of each target against its budget")
    evaluated = [p["plan"] for p in plans.values()
                 if p["plan"] is not None and p["plan"].table is not None]
    if evaluated:
        rep.figure("planned_strain", plot_planned_strain(evaluated),
                   caption="Predicted h0 of the planned searches against each target's "
                           "age-based limit band")


def _plan_sections(rep, plans, sensitivities):
    from cwlimits.plotting.figures import plot_sensitivity

    for name, plan in plans.items():
        setup, target = plan["setup"], plan["target"]
        slug = _slug(name)
        table = sensitivities[name]
        cost = plan["plan"].cost if plan["plan"] is not None else \
            computing_cost(setup, target).total
        case = (f" for the {plan['plan'].case} distance {target.distance:.3g} and age "
                f"{target.age:.4g}" if plan["plan"] is not None else "")
        rep.section(f"Search of {name}",
                    f"{setup.n_seg} segments of {setup.t_seg.to(u.day):.4g}, band "
                    f"{setup.f_min:.4g} to {setup.f_max:.4g}, detectors "
                    f"{', '.join(setup.detectors)}; computing cost "
                    f"{cost.to(u.h).value:.3g} core-hours"
                    + (f", bounded by the {plan['plan'].bound}" if plan["plan"] else "")
                    + f". The setup file plan_{slug}.toml reproduces these numbers with "
                      f"'cwlimits sensitivity --setup' and 'cwlimits cost --setup'{case}.")
        rep.file(f"plan_{slug}.toml", setup.to_toml, caption=f"Setup file of {name}")
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


def _plot_predicted_and_measured(sensitivity, limits, name):
    """Measured h0 limits (points) and the predicted sensitivity (line) with the age band."""
    from cwlimits.plotting.figures import PALETTE, plot_strain_curves, tidy_log_axes

    bands = [("age-based limit (range)", limits["h0_age_pessimistic"][0].value,
              limits["h0_age"][0].value, limits["h0_age_optimistic"][0].value)]
    fig = plot_strain_curves(limits["f_mid"], [("measured upper limit (points)",
                                                limits["h0_limit"])], bands=bands,
                             title=name)
    ax = fig.axes[0]
    colour, style, _ = PALETTE[1]
    ax.plot(sensitivity["f_mid"].to_value(u.Hz), sensitivity["h0"].value, color=colour,
            ls=style, lw=1.2, label="predicted sensitivity")
    ax.legend(fontsize=6, loc="best")
    tidy_log_axes(ax)
    return fig


def _indirect_curves(table, indirect, target, moment_of_inertia):
    """The nominal age-based limits on the ellipticity and r-mode amplitude per band.

    eps from the age-based h0 (n = 5) and alpha from the r-mode age-based h0 (n = 7) at
    the catalogue distance, through the same conversions as the limits
    (:func:`cwlimits.targets.conversions.ellipticity`, ``rmode_amplitude``).
    """
    from cwlimits.targets.conversions import ellipticity, rmode_amplitude

    f = table["f_mid"]
    eps = ellipticity(indirect["h0_age"] * np.ones(len(f)), f, target.distance,
                      moment_of_inertia)
    alpha = rmode_amplitude(indirect["h0_age_rmode"] * np.ones(len(f)), f, target.distance)
    return eps, alpha


def _limits_section(rep, config, target, setup, results, table, noise, simulated,
                    sensitivity, indirect, nominal):
    from cwlimits.plotting.limits import plot_astrophysical_limits, plot_limits, plot_posterior

    slug = _slug(target.name)
    kind = "simulated" if simulated else "supplied"
    rep.section(f"Upper limits for {target.name}",
                f"{config['limits.method'].capitalize()} upper limits at "
                f"{config['statistics.confidence']:g} confidence from the {kind} loudest "
                "statistic of each band, then the ellipticity and r-mode amplitude limits "
                "over the distance prior.")
    if simulated:
        from astropy.table import QTable

        sim = QTable({"f_lo": results.f_lo, "band_width": results.band_width,
                      "loudest_2F": results.loudest, "psd": results.psd})
        rep.table(f"simulated_results_{slug}", sim,
                  caption=f"SIMULATED search results for {target.name} (noise only)",
                  assumptions={"simulated": "loudest of N_t chi-squared(4N) draws per "
                                            "band; pure Gaussian noise",
                               "seed": str(config["seed"])})
    rep.table(f"limits_{slug}", table, caption=f"Upper limits per band for {target.name}")
    rep.figure(f"limits_{slug}", plot_limits(table, title=target.name),
               caption=f"Upper limits on h0 for {target.name} against its age-based limit")
    rep.figure(f"predicted_and_measured_{slug}",
               _plot_predicted_and_measured(sensitivity, table, target.name),
               caption=f"Measured upper limits and predicted sensitivity of {target.name} "
                       "against its age-based limit band", page=True)
    eps_age, alpha_age = _indirect_curves(table, indirect, nominal,
                                          config["indirect.moment_of_inertia"])
    conf = f"{100 * config['statistics.confidence']:g} %"
    for k, fig in enumerate(plot_astrophysical_limits(table, title=target.name,
                                                      eps_indirect=eps_age,
                                                      alpha_indirect=alpha_age)):
        what = ("ellipticity", "r-mode amplitude")[k] if k < 2 else f"panel {k}"
        rep.figure(f"{('eps', 'alpha')[k] if k < 2 else k}_limits_{slug}", fig,
                   caption=f"Upper limits ({conf} confidence) on the {what} of "
                           f"{target.name} against its nominal age-based limit")
    limits_h0 = table["h0_limit"].value
    if np.all(np.isnan(limits_h0)):  # every band empty (no frequentist limit): no posterior
        return
    best = int(np.nanargmin(limits_h0))  # empty (NaN) bands have no limit to compare
    h0, density, _ = band_posterior(results, setup, target, best, noise=noise,
                                    prior=config["limits.prior"], start=config["data.start"])
    rep.figure(f"posterior_{slug}", plot_posterior(
        h0, density, limit=table["h0_limit"][best],
        title=f"{target.name}, band at {table['f_mid'][best]:.5g}"),
        caption=f"Posterior of h0 in the band of {target.name} with the lowest limit")


def _cost_scan(setup, target):
    values = np.geomspace(setup.t_seg.to_value(u.day) / 4, setup.t_seg.to_value(u.day) * 4,
                          9) << u.day
    try:
        return scan_cost(setup.replace(mid_times=None), target, "t_seg", values)
    except Exception:  # a scan point outside the span: skip the figure, not the report
        return None


def _plot_cost_scan(scan, setup, name):
    from cwlimits.plotting.figures import PALETTE, new_figure, tidy_log_axes

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


def _describe(noise):
    return noise.describe() if hasattr(noise, "describe") else str(noise)


def _assumptions(config, noise):
    inertia = config["indirect.moment_of_inertia"]
    return {
        "moment_of_inertia": f"{inertia.to_value(u.kg * u.m**2):.4g} kg m^2",
        "distance_and_age": "catalogue values; ranges give optimistic and pessimistic "
                            "limits; priors uniform in distance, log-uniform in age",
        "braking_index": f"{config['indirect.braking_index']:g} for the age-based limit; "
                         "the searched spin-down range follows the setup's braking-index "
                         "range",
        "noise": f"Gaussian and stationary; {_describe(noise)}",
        "age_comparison": AGE_COMPARISON,
        "statistics": f"false alarm {config['statistics.false_alarm']:g} per band, "
                      f"confidence {config['statistics.confidence']:g}",
        "meaning": "upper limits and predictions, not detection claims",
    }


def _ranges(f_lo, f_hi, mask):
    """Contiguous frequency ranges where ``mask`` holds, as text ('100-180 Hz, ...')."""
    out, k, n = [], 0, len(mask)
    while k < n:
        if not mask[k]:
            k += 1
            continue
        j = k
        while j + 1 < n and mask[j + 1] and np.isclose(f_hi[j], f_lo[j + 1]):
            j += 1
        out.append(f"{f_lo[k]:.4g}-{f_hi[j]:.4g} Hz")
        k = j + 1
    return ", ".join(out) or "nowhere"


def _beats(table, h0_column):
    f_lo = np.asarray(table["f_lo"].to_value(u.Hz))
    f_hi = np.asarray(table["f_hi"].to_value(u.Hz))
    beats = np.asarray(table["beats_age"], bool)
    width = float(np.sum((f_hi - f_lo)[beats]))
    h = np.asarray(table[h0_column].value, float)
    best = int(np.nanargmin(h)) if np.any(np.isfinite(h)) else None
    return width, _ranges(f_lo, f_hi, beats), best


def budget_account(ranking, plans):
    """Where the total budget of a ranking went, in core-hours.

    Parameters
    ----------
    ranking : Ranking
        From :func:`cwlimits.planning.optimise.rank_targets`.
    plans : dict
        The targets that got a plan in the report (name -> plan).

    Returns
    -------
    dict of str -> Quantity or list
        ``total``, ``planned`` (allocated to targets planned in the report), ``spent``
        (cost of their plans), ``funded_not_planned`` (allocated to targets left out by
        ``planning.max_targets``) with ``funded_not_planned_names``, and ``unallocated``.
    """
    table = ranking.table
    budgets = np.asarray(table["budget_allocated"].to_value(u.h))
    total = float(ranking.budgets[-1].to_value(u.h))
    names = list(table["name"])
    planned = [k for k, n in enumerate(names) if n in plans]
    left = [k for k, n in enumerate(names) if n not in plans and budgets[k] > 0]
    spent = sum(float(plans[names[k]]["plan"].cost.to_value(u.h)) for k in planned
                if plans[names[k]]["plan"] is not None)
    return {"total": total << u.h, "planned": float(budgets[planned].sum()) << u.h,
            "spent": spent << u.h,
            "funded_not_planned": float(budgets[left].sum()) << u.h,
            "funded_not_planned_names": [names[k] for k in left],
            # round-off of the split (a few 1e-8 core-hours) is no budget left over
            "unallocated": (0.0 if abs(total - float(budgets.sum())) <= 1e-9 * total
                            else total - float(budgets.sum())) << u.h}


def _budget_text(account):
    text = (f"Budget: {account['total'].value:.4g} core-hours in total; "
            f"{account['planned'].value:.4g} allocated to the targets planned in this report "
            f"(their plans cost {account['spent'].value:.4g})")
    if account["funded_not_planned_names"]:
        text += (f"; {account['funded_not_planned'].value:.4g} allocated by the split to "
                 f"{', '.join(account['funded_not_planned_names'])}, which get no plan "
                 "here because the report plans at most planning.max_targets targets "
                 "(raise it to plan them)")
    text += (f"; {account['unallocated'].value:.4g} not allocated (no target's figure of "
             "merit grows with it on the budget grid).")
    return text


def summary_table(indirect, ranking, plans, sensitivities, limits, max_targets=None):
    """The summary of a report: one row per target of the catalogue.

    Parameters
    ----------
    indirect : QTable
        From :func:`cwlimits.targets.indirect.indirect_limits`.
    ranking : Ranking or None
    plans, sensitivities, limits : dict
        Per planned target: the plan, its :func:`strain_sensitivity` table and its
        :func:`upper_limits` table (limits only where results exist).
    max_targets : int, optional
        The report's limit on planned targets (named in the reason of a funded target
        left without a plan).

    Returns
    -------
    QTable
        ``name``, ``h0_age`` (nominal), ``h0_age_pessimistic``, ``plan`` (text),
        ``cost`` [h], ``h0_predicted_best`` and its ``f_predicted_best`` [Hz],
        ``h0_measured_best`` and ``f_measured_best`` [Hz], ``beats_age_width`` [Hz] and
        ``beats_age_where`` (of the measured limits where there are any, else of the
        prediction) and ``beats_age_basis``.
    """
    from astropy.table import QTable

    allocated = {}
    if ranking is not None:
        allocated = dict(zip(ranking.table["name"],
                             ranking.table["budget_allocated"].to_value(u.h), strict=True))
    order = list(ranking.table["name"]) if ranking is not None else list(indirect["name"])
    by_name = {name: k for k, name in enumerate(indirect["name"])}
    rows = []
    for name in order:
        k = by_name[name]
        row = {"name": name, "h0_age": float(indirect["h0_age"][k].value),
               "h0_age_pessimistic": float(indirect["h0_age_pessimistic"][k].value),
               "plan": "", "cost": np.nan, "h0_predicted_best": np.nan,
               "f_predicted_best": np.nan, "h0_measured_best": np.nan,
               "f_measured_best": np.nan, "beats_age_width": np.nan,
               "beats_age_where": "", "beats_age_basis": ""}
        if name not in plans:
            if allocated.get(name, 0.0) > 0:
                row["plan"] = f"funded, not planned (planning.max_targets = {max_targets})"
            elif ranking is not None:
                row["plan"] = "not searched (no budget in the split)"
            else:
                row["plan"] = f"not searched (planning.max_targets = {max_targets})"
            rows.append(row)
            continue
        plan = plans[name]
        setup = plan["setup"]
        row["plan"] = (f"{setup.n_seg} x {setup.t_seg.to_value(u.day):.3g} d, "
                       f"{setup.f_min.to_value(u.Hz):.4g}-{setup.f_max.to_value(u.Hz):.4g} Hz")
        row["cost"] = (float(plan["plan"].cost.to_value(u.h)) if plan["plan"] is not None
                       else float(computing_cost(setup, plan["target"]).total.to_value(u.h)))
        sens = sensitivities[name]
        width, where, best = _beats(sens, "h0")
        if best is not None:
            row["h0_predicted_best"] = float(sens["h0"][best].value)
            row["f_predicted_best"] = float(sens["f_mid"][best].to_value(u.Hz))
        row.update(beats_age_width=width, beats_age_where=where,
                   beats_age_basis="predicted")
        if name in limits:
            lim = limits[name]
            width, where, best = _beats(lim, "h0_limit")
            if best is not None:
                row["h0_measured_best"] = float(lim["h0_limit"][best].value)
                row["f_measured_best"] = float(lim["f_mid"][best].to_value(u.Hz))
            row.update(beats_age_width=width, beats_age_where=where,
                       beats_age_basis="measured")
        rows.append(row)
    table = QTable()
    units = {"h0_age": u.one, "h0_age_pessimistic": u.one, "cost": u.h,
             "h0_predicted_best": u.one, "f_predicted_best": u.Hz, "h0_measured_best": u.one,
             "f_measured_best": u.Hz, "beats_age_width": u.Hz}
    for col in rows[0]:
        values = [r[col] for r in rows]
        table[col] = (np.array(values, float) << units[col]) if col in units else values
    table.meta["assumptions"] = {
        "h0_age": "nominal age-based limit (catalogue distance and age; Wette et al. 2008, "
                  "n = 5, I = 1e38 kg m^2); h0_age_pessimistic at (d_max, age_max)",
        "beats_age": "beats_age_width and beats_age_where: where h0 (measured upper limit "
                     "if the target has results, else the predicted sensitivity) is below "
                     "the nominal h0_age",
        "cost": "computing cost of the planned search (cwlimits.computing_cost), "
                "core-hours",
        "meaning": "upper limits and predictions under the stated assumptions, not "
                   "detection claims",
    }
    return table


def simulate_results(model, rng: RngLike | None = None):
    """Per-band loudest statistics of a search of pure Gaussian noise (for the demo).

    The loudest of N_t independent chi-squared(4N) values has the CDF F(x)^N_t, so with
    u uniform, x = chi2.isf(1 - u^(1/N_t), 4N), computed as chi2.isf(-expm1(log(u)/N_t))
    to keep precision for N_t up to 1e15 (order statistics; common practice).

    Parameters
    ----------
    model : SignalModel
        The bands, segments and template counts of the search.
    rng : None, int or Generator

    Returns
    -------
    SearchResults
        Labelled with the source ``"simulated"``; the noise floor is the model's.
    """
    from scipy import stats

    from cwlimits.limits.results import SearchResults

    rng = np.random.default_rng(rng)
    u01 = rng.uniform(size=len(model))
    p_exceed = -np.expm1(np.log(u01) / np.asarray(model.n_templates, float))
    loudest = stats.chi2.isf(p_exceed, 4 * model.n_seg)
    return SearchResults(f_lo=model.f_lo, band_width=model.f_hi - model.f_lo, loudest=loudest,
                         convention="total", psd=model.psd,
                         n_templates=np.asarray(model.n_templates, float),
                         source="simulated", rows=np.arange(len(model)) + 2)
