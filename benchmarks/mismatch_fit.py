"""Fit the mismatch correction of cwlimits.sensitivity.mismatch_correction to mock searches.

Run:  /work/venv/bin/python benchmarks/mismatch_fit.py [DATA.json] [--markdown]

DATA.json is the raw output of ``benchmarks/mock_validation.py --json`` (default: the
campaign kept in ``benchmarks/data/mock_validation.json``).  Procedure:

1. per setup, the model's quadratic-metric draws of the coherent and semicoherent lattices
   are regenerated exactly as the campaign drew them (``sample_mismatch`` with the
   campaign's fixed seed, 4096 draws each);
2. the three constants (KAPPA_SHORT, T_KAPPA, SEMI_WEIGHT) minimise the sum over setups of
   the squared differences between the deciles (10 % ... 90 %) of the corrected draws and of
   the measured loudest-template mismatches (noise-free runs), by Nelder-Mead from the
   uncorrected point (1, 1, 1) with the constants kept in their ranges by a penalty;
3. the false-alarm side: the effective number of independent templates of the bank, the
   maximum-likelihood N_eff of the loudest noise-only 2F_sum taken as the largest of N_eff
   independent chi^2_{4N} draws (N_eff = -n / sum log F(x_i), F the chi^2 CDF of
   scipy.stats), against the template count the model uses as trials;
4. before and after: the h0 at the campaign's detection probability predicted with the
   quadratic draws and with the corrected draws (the campaign's orientation rule, data time,
   PSD and threshold), against the measured h0 of the campaign.

The printed constants are the ones to put into cwlimits/sensitivity/mismatch_correction.py.
"""

import argparse
import json
import pathlib
import sys

import astropy.units as u
import numpy as np
from scipy import optimize, stats

from cwlimits.searchspace.lattices import sample_mismatch
from cwlimits.sensitivity import mismatch_correction as mc
from cwlimits.simulation.mockcampaign import MODEL_MISMATCH_SEED
from cwlimits.statistics import detection as det

DEFAULT_DATA = pathlib.Path(__file__).parent / "data" / "mock_validation.json"
DECILES = np.linspace(0.1, 0.9, 9)


def model_draws(config, size=4096):
    """The campaign's quadratic draws (coherent, semicoherent) of one setup."""
    rng = np.random.default_rng(MODEL_MISMATCH_SEED)
    mu_c = sample_mismatch(config["lattice"], 2, config["mu"], size, rng)
    mu_s = (sample_mismatch(config["lattice"], 2, config["mu"], size, rng)
            if config["n_seg"] > 1 else np.zeros(size))
    return mu_c, mu_s


def corrected(config, draws, params):
    kappa_short, t_kappa, semi_weight = params
    return mc.corrected_mismatch(draws[0], draws[1], config["t_seg_h"] * u.h,
                                 kappa_short=kappa_short, t_kappa=t_kappa,
                                 semi_weight=semi_weight)


def objective(params, rows, draws):
    kappa_short, t_kappa, semi_weight = params
    penalty = 0.0
    for value, lo, hi in ((kappa_short, 0.01, 1.0), (t_kappa, 0.01, 100.0),
                          (semi_weight, 0.0, 2.0)):
        penalty += 1e3 * (max(0.0, lo - value) + max(0.0, value - hi)) ** 2
    if penalty:
        return penalty + 1.0
    total = 0.0
    for row, dr in zip(rows, draws, strict=True):
        q_meas = np.quantile(row["mismatch_measured"], DECILES)
        q_model = np.quantile(corrected(row["config"], dr, params), DECILES)
        total += np.sum((q_meas - q_model) ** 2)
    return total


def h0_at(model, mu, confidence):
    rule = (np.asarray(model["r2_nodes"]), np.asarray(model["r2_weights"]))
    return float(det.solve_amplitude(model["threshold"], model["n_seg"],
                                     model["t_data_s"] * u.s, model["s_ref"] / u.Hz, rule,
                                     mu, confidence=confidence, method="exact").value)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("data", nargs="?", default=str(DEFAULT_DATA))
    parser.add_argument("--markdown", action="store_true", help="print the docs table")
    args = parser.parse_args(argv)
    rows = json.loads(pathlib.Path(args.data).read_text())
    draws = [model_draws(r["config"]) for r in rows]
    fit = optimize.minimize(objective, x0=[1.0, 1.0, 1.0], args=(rows, draws),
                            method="Nelder-Mead", options={"xatol": 1e-4, "fatol": 1e-8,
                                                           "maxiter": 4000})
    params = fit.x
    print(f"KAPPA_SHORT = {params[0]:.3f}\nT_KAPPA = {params[1]:.3f}\n"
          f"SEMI_WEIGHT = {params[2]:.3f}\n(objective {fit.fun:.3g}, "
          f"uncorrected {objective([1.0, 1.0, 1.0], rows, draws):.3g})")
    used = (mc.KAPPA_SHORT, mc.T_KAPPA, mc.SEMI_WEIGHT)
    print(f"constants in cwlimits/sensitivity/mismatch_correction.py: {used}")
    lines = ["| setup | templates | mismatch mean: measured / quadratic / corrected | KS p "
             "(corrected) | h0 measured (95 % range) | measured / quadratic model | "
             "measured / corrected model | false alarms (nominal 1 %) |",
             "|---|---|---|---|---|---|---|---|"]
    for row, dr in zip(rows, draws, strict=True):
        conf = row["confidence"]
        mu_q = np.minimum(dr[0] + dr[1], 1.0)
        mu_c = corrected(row["config"], dr, used)
        h_q = h0_at(row["model"], mu_q, conf)
        h_c = h0_at(row["model"], mu_c, conf)
        meas = row["h0_measured"]
        lo, hi = row["h0_measured_range"]
        ks = stats.ks_2samp(row["mismatch_measured"], mu_c).pvalue
        fa_lo, fa_hi = row["false_alarm_interval"]
        lines.append(
            f"| {row['setup']} | {row['n_templates']} | "
            f"{np.mean(row['mismatch_measured']):.3f} / {np.mean(mu_q):.3f} / "
            f"{np.mean(mu_c):.3f} | {ks:.2g} | {meas:.3g} ({lo:.3g}-{hi:.3g}) | "
            f"{meas / h_q:.3f} ({lo / h_q:.2f}-{hi / h_q:.2f}) | "
            f"{meas / h_c:.3f} ({lo / h_c:.2f}-{hi / h_c:.2f}) | "
            f"{row['false_alarms']}/{row['noise_runs']} ({fa_lo:.3f}-{fa_hi:.3f}) |")
    print("\n".join(lines) if args.markdown else "\n".join(lines[2:]))
    print("\n| setup | templates (model trials) | effective independent templates | ratio |"
          "\n|---|---|---|---|")
    for row in rows:
        x = np.asarray(row["noise_max"])
        log_f = stats.chi2(4 * row["config"]["n_seg"]).logcdf(x)
        n_eff = -x.size / np.sum(log_f)
        print(f"| {row['setup']} | {row['n_templates']} | {n_eff:.0f} | "
              f"{n_eff / row['n_templates']:.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
