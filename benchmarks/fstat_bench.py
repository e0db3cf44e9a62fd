"""Speed of the FFT F-statistic against the direct O(N^2) sums, and the per-template costs.

Run:  /work/venv/bin/python benchmarks/fstat_bench.py [--quick] [--json FILE] [--full-direct]

One detector, one segment of 2^16 complex samples (2^12 with --quick), zero-padded to
L = 2^17 frequencies.  The FFT path (``cwlimits.simulation.fstat._coherent_stage`` + 2F) is
timed over
all L frequencies.  The direct sums (``cwlimits.simulation.fstat._direct_filters``: exp(-i dPhi)
at every
sample and frequency, then the sums) cost exactly the same per frequency, so by default they
are timed on a random subset of frequencies and scaled by L / subset (``--full-direct``
evaluates all L; minutes at 2^16).  Both are checked to agree on the subset.  The baseline is
measured in the same run; the speed-up must exceed 100 at 2^16 samples.

Then ``cwlimits.simulation.fstat.measure_unit_costs`` gives the seconds per template of the
coherent
stage (per detector and segment) and of the semi-coherent sum (per segment), the numbers
``cwlimits calibrate`` will feed to the cost model.
"""

import sys

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord
from benchutil import bench_parser, best_time, write_json

from cwlimits.simulation import fstat as fs
from cwlimits.simulation import synthetic as sy

REQUIRED_SPEEDUP = 100.0


def main(argv=None):
    parser = bench_parser(__doc__)
    parser.add_argument("--full-direct", action="store_true",
                        help="evaluate the direct sums at every frequency (slow)")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(2026)

    log2_m = 12 if args.quick else 16
    m = 2**log2_m
    band = 0.25 * u.Hz
    data = sy.simulate_noise("H1", 1e-46 * u.Hz**-1, 150 * u.Hz, band, m / band,
                             [1.2e9] * u.s, rng=rng)
    sky = SkyCoord("7h00m", "-30d")  # arbitrary direction (not a real object)
    sig = sy.CWSignal(sky, 2e-25, 0.4, 0.3 * u.rad, 1.0 * u.rad, 150.031 * u.Hz,
                      -1e-11 * u.Hz / u.s)
    data = sy.inject(data, sig)
    fdot = sig.fdot.to_value(u.Hz / u.s)
    dt = 1.0 / band.to_value(u.Hz)
    length = 2 * m
    w = fs._weights(data, data.psd.to_value(u.Hz**-1))
    a, b = data.modulation(sky)
    wz = w * data.data
    A, B, C = fs._abc(w, a, b)

    def fft_path():
        fa, fb = fs._coherent_stage(wz, a, b, fdot, dt, length)
        return fs._two_f(fa, fb, A[:, None], B[:, None], C[:, None])[0]

    two_fft, t_fft = best_time(fft_path, 5)
    offsets = np.fft.fftshift(np.fft.fftfreq(length, d=dt))
    n_sub = length if args.full_direct else min(length, 256 if args.quick else 1024)
    pick = np.sort(rng.choice(length, n_sub, replace=False))

    def direct_path():
        fa, fb = fs._direct_filters(wz, a, b, offsets[pick], fdot, dt)
        return fs._two_f(fa, fb, A[:, None], B[:, None], C[:, None])[0]

    two_dir, t_dir_sub = best_time(direct_path, 1 if args.full_direct else 2)
    t_dir = t_dir_sub * length / n_sub
    agreement = float(np.max(np.abs(two_fft[pick] - two_dir)) / np.max(two_dir))
    speedup = t_dir / t_fft

    # the public search on the same data (a(t), b(t) cached), for reference
    _, t_public = best_time(lambda: fs.stackslide_fstat(data, sky, sig.fdot), 3)
    costs = fs.measure_unit_costs(n_samples=m, n_seg=16, repeats=5, rng=rng)

    print(f"segment: {m} samples (2^{log2_m}), FFT length {length}, 1 detector")
    print(f"FFT path:     {t_fft * 1e3:10.3f} ms for {length} frequencies")
    print(f"direct sums:  {t_dir:10.3f} s  (timed on {n_sub} of {length} frequencies, "
          f"{t_dir_sub:.3f} s, scaled linearly)")
    print(f"speed-up FFT / direct: {speedup:,.0f}x "
          f"(required > {REQUIRED_SPEEDUP:g}x at 2^16 samples)")
    print(f"max |2F_fft - 2F_direct| / max 2F on those frequencies: {agreement:.2e}")
    print(f"public stackslide_fstat on the same data: {t_public * 1e3:.3f} ms")
    print(f"unit cost, coherent:      {costs['coherent'].to_value(u.s):.3e} s per template "
          f"per detector per segment (M = {costs['n_samples']}, L = {costs['fft_length']})")
    print(f"unit cost, semi-coherent: {costs['semicoherent'].to_value(u.s):.3e} s per "
          f"template per segment ({costs['n_seg']} segments)")

    ok = agreement < 1e-10 and (args.quick or speedup > REQUIRED_SPEEDUP)
    result = {
        "n_samples": m, "fft_length": length, "direct_frequencies_timed": int(n_sub),
        "t_fft_s": t_fft, "t_direct_s": t_dir, "speedup": speedup,
        "max_rel_difference": agreement, "t_public_s": t_public,
        "unit_cost_coherent_s": costs["coherent"].to_value(u.s),
        "unit_cost_semicoherent_s": costs["semicoherent"].to_value(u.s),
        "unit_cost_n_samples": costs["n_samples"], "unit_cost_n_seg": costs["n_seg"],
        "quick": bool(args.quick), "ok": bool(ok),
    }
    if args.json:
        write_json(args.json, result)
    print("OK" if ok else "FAILED: speed-up or agreement below target")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
