"""Validation of the sensitivity model against the directed mock search, over six setups.

Run:  /work/venv/bin/python benchmarks/mock_validation.py [--quick] [--json FILE]

Not a speed benchmark (it is not named *_bench.py, so benchmarks/run.py does not run it):
the slow, multi-setup campaign of docs/validation.md.  For each setup (N = 1, 4 and 16
segments; cubic and covering lattices; coherent mismatch 0.1-0.5; with and without gaps)
:func:`cwlimits.simulation.mockcampaign.mock_campaign` measures the loudest-template
mismatch, the efficiency against h0 and the false alarms, and compares the h0 at 90 %
detection probability with the model (quadratic-metric mismatches added) and with the model
corrected by the measured mismatch.  About 10 minutes on one core at full size.
"""

import argparse
import json
import sys
import time

import astropy.units as u
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
H0_FACTORS = (0.5, 0.65, 0.8, 1.0, 1.25)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few injections")
    parser.add_argument("--json", default=None, help="write the summaries here")
    args = parser.parse_args(argv)
    n = 8 if args.quick else 60
    rows = []
    for n_seg, t_h, lattice, mu, duty in SETUPS:
        setup = SearchSetup(t_seg=t_h * u.h, n_seg=n_seg, band=(149.9 * u.Hz, 150.1 * u.Hz),
                            lattice=lattice, mismatch_coherent=mu, mismatch_semicoherent=mu)
        t0 = time.perf_counter()
        res = mock_campaign(setup, SKY, duty=duty, n_injections=n, n_noise=n, n_mismatch=n,
                            h0_factors=H0_FACTORS, rng=2026, confidence=0.9)
        s = dict(res.summary)
        s["seconds"] = time.perf_counter() - t0
        s["efficiency"] = [float(x) for x in res.table["efficiency"]]
        s["predicted"] = [float(x) for x in res.table["predicted"]]
        s["corrected"] = [float(x) for x in res.table["corrected"]]
        rows.append(s)
        print(f"{s['setup']:45s} templates {s['n_templates']:6d}  h0 meas/pred "
              f"{s['ratio']:.3f}  meas/corrected {s['ratio_corrected']:.3f}  mismatch "
              f"{s['mismatch_mean_measured']:.3f} vs {s['mismatch_mean_model']:.3f}  FA "
              f"{s['false_alarms']}/{s['noise_runs']}  ({s['seconds']:.0f} s)", flush=True)
    if args.json:
        with open(args.json, "x") as fh:
            json.dump(rows, fh, indent=1, default=str)
    return 0


if __name__ == "__main__":
    sys.exit(main())
