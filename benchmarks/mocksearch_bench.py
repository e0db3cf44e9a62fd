"""Speed and accuracy of the directed mock search against direct F-statistic evaluations.

Run:  /work/venv/bin/python benchmarks/mocksearch_bench.py [--quick] [--json FILE]

Two detectors, N segments of 6 h (3 with --quick, else 10) at a band of 1/16 Hz, a Doppler
modulated, spinning-down signal; the covering lattice with mismatch 0.3.  Compared on the
same templates:

* the mock search (resampling once, then one FFT per segment and fdot row, then the
  StackSlide sum over the fine lattice), timed per fine template;
* the direct F-statistic on the resampled series (explicit sums at the coherent templates the
  search used, ``resampled_direct_fstat``): agreement must be <= 1e-10 relative (the same
  sums, rounding only);
* the exact demodulated F-statistic (explicit sums of the astropy Doppler phase at the
  detector samples, no resampling, ``demodulated_fstat``): the accuracy of the resampling,
  stated as the largest relative difference on the templates timed.

The direct paths are timed on a random subset of templates and scaled linearly (their cost
per template is fixed).  The baselines are measured in the same run; the speed-up of the
search over the exact direct evaluation must exceed 100 at full size.
"""

import sys

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord
from benchutil import bench_parser, best_time, write_json

from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.simulation import mocksearch as ms
from cwlimits.simulation import synthetic as sy

REQUIRED_SPEEDUP = 100.0
SKY = SkyCoord(ra=1.1 * u.rad, dec=-0.5 * u.rad)   # an arbitrary direction (fictional)
FDOT = u.Hz / u.s


def main(argv=None):
    args = bench_parser(__doc__).parse_args(argv)
    n_seg = 3 if args.quick else 10
    t_seg = 6 * 3600.0
    starts = (1.3e9 + np.arange(n_seg) * t_seg) * u.s
    data = sy.simulate_noise("H1,L1", [1e-46, 2e-46] * u.Hz**-1, 150 * u.Hz, 0.0625 * u.Hz,
                             t_seg * u.s, starts, rng=11, duty=0.85)
    sig = sy.CWSignal(SKY, 3e-25, 0.2, 0.4 * u.rad, 0.5 * u.rad, f=150.0012 * u.Hz,
                      fdot=-3e-11 * FDOT)
    data = sy.inject(data, sig, doppler=True)
    setup = SearchSetup(t_seg=t_seg * u.s, n_seg=n_seg, band=(149.9 * u.Hz, 150.1 * u.Hz),
                        lattice="covering", mismatch_coherent=0.3, mismatch_semicoherent=0.3)
    box = (149.99 * u.Hz, 150.01 * u.Hz), (-4e-10 * FDOT, 0 * FDOT)

    def search():
        return ms.mock_search(data, SKY, setup, *box, keep_segments=True)

    res, t_search = best_time(search, 3)
    n = len(res.bank)
    rng = np.random.default_rng(5)
    pick = np.sort(rng.choice(n, min(n, 20 if args.quick else 60), replace=False))
    bd = ms.resample_to_barycentre(data, SKY)
    direct, t_direct = best_time(lambda: ms.resampled_direct_fstat(
        bd, res.coarse["df_hz"][:, pick], res.coarse["fdot"][:, pick]), 2)
    fft_vs_direct = float(np.max(np.abs(direct - res.two_f_segments[:, pick])
                                 / np.abs(direct)))
    # the exact Doppler phase at the coherent templates used: per segment the template is
    # (df, fdot) at the segment's barycentric mid-time, i.e. f(t_ref) = df - fdot mid_s
    f_ref = data.f_ref.to_value(u.Hz)
    exact = np.empty_like(direct)

    def exact_path():
        for k in range(n_seg):
            df, fd = res.coarse["df_hz"][k, pick], res.coarse["fdot"][k, pick]
            f_tref = f_ref + df - fd * bd.mid_s[k]
            exact[k] = ms.demodulated_fstat(data.select([k]), SKY, f_tref * u.Hz,
                                            fd * FDOT)[0]
        return exact

    _, t_exact = best_time(exact_path, 1)
    loud = exact > 0.2 * exact.max()
    resample_err = float(np.max(np.abs(direct[loud] - exact[loud]) / exact[loud]))
    per_search = t_search / n
    per_direct = t_direct / pick.size
    per_exact = t_exact / pick.size
    speedup_direct, speedup_exact = per_direct / per_search, per_exact / per_search
    print(f"{n_seg} segments x {data.n_samples} samples x 2 detectors; {n} fine templates, "
          f"{res.n_coherent} coherent evaluations, FFT length {res.fft_length}")
    print(f"mock search:         {t_search:8.3f} s  ({per_search * 1e6:.1f} us per template)")
    print(f"direct (resampled):  {per_direct * 1e3:8.3f} ms per template "
          f"(timed on {pick.size}); speed-up {speedup_direct:,.0f}x")
    print(f"exact demodulated:   {per_exact * 1e3:8.3f} ms per template; speed-up "
          f"{speedup_exact:,.0f}x (required > {REQUIRED_SPEEDUP:g}x at full size)")
    print(f"accuracy: search vs direct sums on the same templates {fft_vs_direct:.1e} "
          f"(relative, per segment); resampled vs exact Doppler phase {resample_err:.1e} "
          "(relative, templates with 2F_k above 20 % of the largest)")
    ok = fft_vs_direct < 1e-10 and resample_err < 1e-2 and (
        args.quick or speedup_exact > REQUIRED_SPEEDUP)
    result = {"n_seg": n_seg, "n_templates": n, "t_search_s": t_search,
              "per_template_search_s": per_search, "per_template_direct_s": per_direct,
              "per_template_exact_s": per_exact, "speedup_direct": speedup_direct,
              "speedup_exact": speedup_exact, "fft_vs_direct": fft_vs_direct,
              "resample_error": resample_err, "quick": bool(args.quick), "ok": bool(ok)}
    if args.json:
        write_json(args.json, result)
    print("OK" if ok else "FAILED: agreement or speed-up below target")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
