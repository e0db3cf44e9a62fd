"""Speed of the vectorised band averaging against a per-band adaptive-quadrature loop.

Run:  /work/venv/bin/python benchmarks/noise_bench.py [--quick] [--json FILE]

Times :func:`cwlimits.noise.band_psd` of the embedded design fit over a grid of 0.1 Hz
bands from 20 Hz in one call (20 000 bands; 2 000 with --quick), and a baseline measured in
the same run: ``scipy.integrate.quad`` of 1/S_n band by band in a Python loop (what a
non-vectorised harmonic band average costs), on a subset of the bands spread over the
range (300; 30 with --quick).  Prints the time per band of each, their ratio, and the
largest relative difference between the two on the subset.  No timing is asserted.
"""

import time

import astropy.units as u
import numpy as np
import scipy.integrate
from benchutil import bench_parser, write_json

from cwlimits.noise import band_psd, noise_model

MODEL = "second-gen-fit"
BAND_WIDTH_HZ = 0.1


def quad_band_psd(model, lo_hz, hi_hz):
    """Harmonic band mean (hi - lo) / int 1/S_n df, one band at a time (the baseline)."""
    out = np.empty(lo_hz.size)
    for j, (lo, hi) in enumerate(zip(lo_hz, hi_hz, strict=True)):
        inv, _ = scipy.integrate.quad(
            lambda f: 1.0 / model.psd(f * u.Hz).to_value(u.Hz**-1), lo, hi)
        out[j] = (hi - lo) / inv
    return out


def main(argv=None):
    parser = bench_parser(__doc__)
    args = parser.parse_args(argv)
    n_bands, n_base = (2_000, 30) if args.quick else (20_000, 300)

    model = noise_model(MODEL)
    lo = 20.0 + BAND_WIDTH_HZ * np.arange(n_bands)
    hi = lo + BAND_WIDTH_HZ
    band_psd(model, lo[:2] * u.Hz, hi[:2] * u.Hz)  # warm-up: first-call set-up untimed

    t0 = time.perf_counter()
    fast = band_psd(model, lo * u.Hz, hi * u.Hz).to_value(u.Hz**-1)
    t_fast = (time.perf_counter() - t0) / n_bands

    pick = np.linspace(0, n_bands - 1, n_base).astype(int)
    t0 = time.perf_counter()
    slow = quad_band_psd(model, lo[pick], hi[pick])
    t_base = (time.perf_counter() - t0) / n_base
    diff = float(np.max(np.abs(fast[pick] / slow - 1)))

    print(f"{MODEL}: {n_bands} bands of {BAND_WIDTH_HZ} Hz from {lo[0]:g} Hz")
    print(f"band_psd, {n_bands} bands in one call:   {t_fast * 1e6:10.2f} us per band")
    print(f"baseline quad loop ({n_base} bands):     {t_base * 1e6:10.2f} us per band")
    print(f"speed-up: {t_base / t_fast:.0f}x; max relative difference {diff:.1e}")

    if args.json:
        figures = {"model": MODEL, "n_bands": n_bands, "band_width_hz": BAND_WIDTH_HZ,
                   "baseline_bands": n_base, "band_psd_us_per_band": t_fast * 1e6,
                   "quad_loop_us_per_band": t_base * 1e6, "speedup": t_base / t_fast,
                   "max_rel_difference": diff, "quick": bool(args.quick)}
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
