"""Validation of the sensitivity model against the directed mock search, over six setups.

Run:  /work/venv/bin/python benchmarks/mock_validation.py [--quick] [--json FILE]
      [--injections N] [--noise-runs N] [--mismatch-runs N]

Not a speed benchmark (it is not named *_bench.py, so benchmarks/run.py does not run it):
the slow, multi-setup campaign of docs/validation.md.  For each setup (N = 1, 4 and 16
segments; cubic and covering lattices; coherent mismatch 0.1-0.5; with and without gaps)
:func:`cwlimits.simulation.mockcampaign.mock_campaign` measures the loudest-template
mismatch, the efficiency against h0 and the loudest 2F of noise-only runs, and compares the
h0 at 90 % detection probability with the model (quadratic-metric mismatches added) and
with the model corrected by the measured mismatch.  ``--json`` keeps the raw campaign data
(measured mismatches, noise maxima, detection counts and the model's inputs) after every
setup, which ``benchmarks/mismatch_fit.py`` reads to fit the mismatch correction of
:mod:`cwlimits.sensitivity.mismatch_correction`.  Default size (200 injections per h0, 300
noise-only and 300 noise-free runs): about an hour on one core.
"""

import argparse
import json
import os
import sys
import time

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord

from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.simulation.mockcampaign import mock_campaign

SKY = SkyCoord(ra=1.1 * u.rad, dec=-0.5 * u.rad)   # an arbitrary direction (fictional target)
# (n_seg, t_seg [h], lattice, mismatch, duty)
SETUPS = [
    (1, 12, "cubic", 0.3, 1.0),
    (1, 12, "covering", 0.1, 0.8),
    (4, 6, "covering", 0.3, 1.0),
    (4, 6, "cubic", 0.5, 0.8),
    (16, 3, "covering", 0.2, 0.8),
    (16, 3, "cubic", 0.4, 1.0),
]
H0_FACTORS = (0.55, 0.7, 0.85, 1.0, 1.2)
SEED = 2026


def make_setup(n_seg, t_h, lattice, mu):
    """The SearchSetup of one row of SETUPS (a fictional band near 150 Hz, H1 and L1)."""
    return SearchSetup(t_seg=t_h * u.h, n_seg=n_seg, band=(149.9 * u.Hz, 150.1 * u.Hz),
                       lattice=lattice, mismatch_coherent=mu, mismatch_semicoherent=mu)


def _plain(x):
    if isinstance(x, np.ndarray):
        return x.tolist()
    if isinstance(x, (np.floating, np.integer)):
        return x.item()
    if isinstance(x, (tuple, list)):
        return [_plain(v) for v in x]
    if isinstance(x, dict):
        return {k: _plain(v) for k, v in x.items()}
    return x


def _write(path, rows):
    tmp = path + ".part"
    with open(tmp, "w") as fh:
        json.dump(_plain(rows), fh, indent=1, default=str)
    os.replace(tmp, path)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few injections")
    parser.add_argument("--json", default=None, help="write the summaries and raw data here")
    parser.add_argument("--injections", type=int, default=200, help="injections per h0")
    parser.add_argument("--noise-runs", type=int, default=300)
    parser.add_argument("--mismatch-runs", type=int, default=300)
    args = parser.parse_args(argv)
    n_inj, n_noise, n_mm = ((8, 8, 8) if args.quick else
                            (args.injections, args.noise_runs, args.mismatch_runs))
    rows = []
    for n_seg, t_h, lattice, mu, duty in SETUPS:
        setup = make_setup(n_seg, t_h, lattice, mu)
        t0 = time.perf_counter()
        res = mock_campaign(setup, SKY, duty=duty, n_injections=n_inj, n_noise=n_noise,
                            n_mismatch=n_mm, h0_factors=H0_FACTORS, rng=SEED,
                            confidence=0.9)
        s = dict(res.summary)
        s["config"] = {"n_seg": n_seg, "t_seg_h": t_h, "lattice": lattice, "mu": mu,
                       "duty": duty}
        s["seconds"] = time.perf_counter() - t0
        for col in ("h0", "h0_over_predicted", "n_injections", "n_detected", "efficiency",
                    "ci_low", "ci_high", "predicted", "corrected"):
            s[col] = np.asarray(res.table[col]).tolist()
        s["mismatch_measured"] = res.mismatch_measured
        s["noise_max"] = res.noise_max
        s["model"] = {k: v for k, v in res.model.items()
                      if k not in ("mu_coherent", "mu_semicoherent")}
        rows.append(s)
        print(f"{s['setup']:45s} templates {s['n_templates']:6d}  h0 meas/pred "
              f"{s['ratio']:.3f}  meas/corrected {s['ratio_corrected']:.3f}  mismatch "
              f"{s['mismatch_mean_measured']:.3f} vs {s['mismatch_mean_model']:.3f}  FA "
              f"{s['false_alarms']}/{s['noise_runs']}  ({s['seconds']:.0f} s)", flush=True)
        if args.json:
            _write(args.json, rows)
    return 0


if __name__ == "__main__":
    sys.exit(main())
