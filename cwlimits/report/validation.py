"""The optional validation section of a report: a small mock-search campaign per plan.

With the configuration key ``validation.injections`` > 0, every planned setup is checked
against the directed mock search (:func:`cwlimits.simulation.mockcampaign.mock_campaign`) at
its target's sky position: simulated Gaussian data of the setup's segments and detectors
(a 1/16 Hz band at the middle of the setup's band), signals with Doppler modulation and
random off-grid (f, fdot), the setup's lattice banks.  The section shows, per plan, the
measured efficiency against h0 with the model's curve, the loudest-template mismatch
against the model's distribution, and the campaign table with its assumptions.  A campaign
this small (a few runs per h0) is a smoke check of the model for the plan, not a
validation to 10 %: docs/validation.md gives the campaign sizes that resolve that.

With ``validation.tables`` (target -> the ECSV table of ``cwlimits validate --mock-search
--out``) the section shows those campaigns, of any size, instead.
"""

import astropy.units as u

from cwlimits.errors import SizeLimitError
from cwlimits.runtime.executor import named_seed

__all__ = ["H0_FACTORS", "validation_section", "validation_tables_section"]

#: Injected h0 in units of the plan's predicted h0 (below, at and above it).
H0_FACTORS = (0.7, 1.0, 1.4)


def validation_section(rep, plans, *, n_injections, seed, confidence, false_alarm,
                       echo=None):
    """Add the mock-search validation of every plan to a report.

    Parameters
    ----------
    rep : cwlimits.report.html.Report
    plans : dict
        Target name -> plan (``setup`` and ``target``), as in :mod:`cwlimits.report.chain`.
    n_injections : int
        Injections per h0, noise-only runs and noise-free runs per plan (> 0).
    seed : int
        The configuration's seed; each plan's campaign seed is derived from it and its name.
    confidence, false_alarm : float
        The plan's detection and false-alarm probabilities.
    echo : callable, optional
        Receives one line of text per plan.

    Returns
    -------
    dict
        Target name -> :class:`~cwlimits.simulation.mockcampaign.MockCampaignResult` (or the
        reason it was skipped, a str).
    """
    from cwlimits.plotting.validation import plot_mismatch_histogram, plot_mock_efficiency
    from cwlimits.simulation.mockcampaign import mock_campaign

    echo = echo or (lambda text: None)
    n = int(n_injections)
    rep.section("Validation with a mock search",
                f"For each planned setup, a small campaign of the directed mock search at the "
                f"target's sky position: {n} injections at each of "
                f"{', '.join(f'{x:g}' for x in H0_FACTORS)} x the predicted h0, {n} "
                f"noise-only and {n} noise-free runs (simulated Gaussian noise, Doppler "
                "modulated signals off the template grid, the setup's lattices).  With so "
                "few runs the efficiencies carry wide binomial intervals: a smoke check of "
                "the sensitivity model for the plan, not a validation to 10 % "
                "(docs/validation.md).")
    out = {}
    for name, plan in plans.items():
        setup, target = plan["setup"], plan["target"]
        slug = "".join(c if c.isalnum() else "_" for c in name.lower()).strip("_")
        try:
            res = mock_campaign(setup, target.coord, n_injections=n, n_noise=n,
                                n_mismatch=n, h0_factors=H0_FACTORS,
                                confidence=confidence, false_alarm=false_alarm,
                                rng=named_seed(seed, f"validation:{name}"))
        except SizeLimitError as exc:
            reason = (f"The mock search of {name}'s setup is too large for the report "
                      f"({exc.reason}); run 'cwlimits validate --mock-search' on its setup "
                      "file instead.")
            rep.section(f"Mock search of {name}", reason)
            out[name] = reason
            echo(f"validation of {name}: skipped (too large)")
            continue
        s = res.summary
        measured = (f"{s['h0_measured']:.3g}" if s["h0_measured"] < float("inf")
                    else "not reached")
        rep.section(f"Mock search of {name}",
                    f"{s['setup']}; {s['n_templates']} templates in the searched box, "
                    f"threshold 2F > {s['threshold']:.4g}.  h0 at "
                    f"{100 * confidence:g} % detection: predicted {s['h0_predicted']:.3g}, "
                    f"measured {measured}; mean loudest-template mismatch measured "
                    f"{s['mismatch_mean_measured']:.3f} against {s['mismatch_mean_model']:.3f} "
                    f"in the model; false alarms {s['false_alarms']} of {s['noise_runs']} "
                    f"noise-only runs (nominal {100 * false_alarm:g} %).")
        table = res.table.copy()
        table["h0"] = table["h0"].value << u.one
        rep.table(f"validation_{slug}", table,
                  caption=f"Mock-search campaign of {name}: detections per h0 against the "
                          "model", assumptions=res.assumptions)
        rep.figure(f"validation_efficiency_{slug}", plot_mock_efficiency(res, title=name),
                   caption=f"Detection efficiency of the mock search of {name} against the "
                           "model")
        rep.figure(f"validation_mismatch_{slug}", plot_mismatch_histogram(res, title=name),
                   caption=f"Loudest-template mismatch of the mock search of {name} against "
                           "the model's distribution")
        out[name] = res
        echo(f"validation of {name}: {len(table)} amplitudes, {s['n_templates']} templates")
    return out


#: Columns and summary keys a table of ``cwlimits validate --mock-search --out`` carries.
TABLE_COLUMNS = ("h0", "n_injections", "n_detected", "efficiency", "ci_low", "ci_high",
                 "predicted")
TABLE_SUMMARY = ("setup", "n_templates", "threshold", "confidence", "h0_predicted",
                 "h0_measured", "ratio", "false_alarms", "noise_runs")


def validation_tables_section(rep, tables, echo=None):
    """Add campaigns written by ``cwlimits validate --mock-search --out`` to a report.

    Parameters
    ----------
    rep : cwlimits.report.html.Report
    tables : dict
        Target name -> path of the ECSV table.
    echo : callable, optional

    Returns
    -------
    dict
        Target name -> the table read (QTable).

    Raises
    ------
    InputError
        A table that is not one of ``cwlimits validate --mock-search`` (naming the file and
        the missing column or summary key).
    """
    from astropy.table import QTable

    from cwlimits.errors import InputError

    echo = echo or (lambda text: None)
    rep.section("Validation with a mock search",
                "Campaigns of the directed mock search run by 'cwlimits validate "
                "--mock-search' on the planned setups (simulated Gaussian noise, Doppler "
                "modulated signals off the template grid, the setups' lattices), read from "
                "their tables: detections per h0 against the sensitivity model.")
    out = {}
    for name, path in tables.items():
        try:
            table = QTable.read(path, format="ascii.ecsv")
        except Exception as exc:  # noqa: BLE001 - any unreadable file is one input error
            raise InputError(f"cannot read the validation table: {exc}", file=str(path),
                             value=name) from None
        for col in TABLE_COLUMNS:
            if col not in table.colnames:
                raise InputError("not a table of 'cwlimits validate --mock-search': no "
                                 f"column '{col}'", file=str(path), value=col)
        for key in TABLE_SUMMARY:
            if key not in table.meta:
                raise InputError("not a table of 'cwlimits validate --mock-search': no "
                                 f"summary key '{key}'", file=str(path), value=key)
        m = table.meta
        measured = (f"{m['h0_measured']:.3g}" if m["h0_measured"] < float("inf")
                    else "not reached")
        slug = "".join(c if c.isalnum() else "_" for c in name.lower()).strip("_")
        rep.section(f"Mock search of {name}",
                    f"{m['setup']} ({path}); {m['n_templates']} templates in the searched "
                    f"box, threshold 2F > {m['threshold']:.4g}.  h0 at "
                    f"{100 * m['confidence']:g} % detection: predicted "
                    f"{m['h0_predicted']:.3g}, measured {measured} (measured/predicted "
                    f"{m['ratio']:.3f}); false alarms {m['false_alarms']} of "
                    f"{m['noise_runs']} noise-only runs.")
        shown = table.copy()
        shown["h0"] = u.Quantity(shown["h0"]).value << u.one
        rep.table(f"validation_{slug}", shown,
                  caption=f"Mock-search campaign of {name} (from {path}): detections per "
                          "h0 against the model", assumptions=m.get("assumptions"))
        out[name] = table
        echo(f"validation of {name}: read {path}")
    return out
