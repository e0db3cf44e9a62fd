"""Speed of a known pulsar's posterior: the vectorised grid against emcee, equal accuracy.

Run:  /work/venv/bin/python benchmarks/pulsar_bench.py [--quick] [--json FILE]

Fictional known pulsar, simulated down-converted data of H1 and L1 (Doppler on, stretches
of different noise, gaps), noise-only.  The baseline is emcee on the same likelihood and
priors in the same run; the figure is the ratio of the times, with the difference of the
95 % limits beside it in units of emcee's Monte-Carlo error (equal accuracy means that
difference is of order one).  Both noise models: known (phi0 integrated in closed form on
the grid) and Student-t (phi0 on the grid).  No timing is asserted anywhere.
"""

import math

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord
from benchutil import bench_parser, best_time, write_json

from cwlimits.pulsars.data import add_noise, simulate_pulsar_signal
from cwlimits.pulsars.posterior import pulsar_posterior
from cwlimits.targets.catalogue import Target


def main():
    args = bench_parser(__doc__).parse_args()
    n_stretch = 6 if args.quick else 24
    steps = 600 if args.quick else 4000
    target = Target("Fict bench pulsar", SkyCoord(40 * u.deg, 20 * u.deg), 1.5 * u.kpc,
                    1.5 * u.kpc, 1.5 * u.kpc, np.nan * u.yr, np.nan * u.yr, np.nan * u.yr,
                    30 * u.Hz, -4e-11 * u.Hz / u.s)
    psd = np.array([[1e-46] * (n_stretch // 2) + [4e-46] * (n_stretch - n_stretch // 2),
                    [2e-46] * n_stretch])
    clean = simulate_pulsar_signal(target, "H1,L1", 1.3e9, n_stretch, 4 * u.hour, h0=0.0,
                                   cosi=0.0, psi=0.0, phi0=0.0, psd=psd, gap_fraction=0.2,
                                   rng=1)
    data = add_noise(clean, 2)
    figures = {"samples": len(data), "stretches": data.n_stretches, "emcee_steps": steps}
    for noise in ("given", "student-t"):
        grid, t_grid = best_time(lambda n=noise: pulsar_posterior(data, target, noise=n), 2)
        mc, t_mc = best_time(lambda n=noise: pulsar_posterior(
            data, target, noise=n, sampler="emcee", rng=3, n_steps=steps,
            burn=steps // 4), 1)
        h, mass = grid.marginals["h0"]
        density = np.interp(grid.upper_limit, h, mass / np.gradient(h))
        sigma = math.sqrt(0.95 * 0.05 / mc.n_eff) / density
        figures[f"{noise}_grid_s"] = t_grid
        figures[f"{noise}_emcee_s"] = t_mc
        figures[f"{noise}_speedup_grid_vs_emcee"] = t_mc / t_grid
        figures[f"{noise}_limit_difference_in_emcee_sigma"] = (
            (mc.upper_limit - grid.upper_limit) / sigma)
        print(f"noise {noise}: grid {t_grid:.2f} s, emcee {t_mc:.2f} s ({steps} steps) -> "
              f"grid {t_mc / t_grid:.1f}x faster; limits differ by "
              f"{figures[f'{noise}_limit_difference_in_emcee_sigma']:+.2f} emcee sigma")
    if args.json:
        write_json(args.json, figures)


if __name__ == "__main__":
    main()
