"""Speed of the vectorised band averaging against a per-band adaptive-quadrature loop.

Prints the time per band of :func:`cwlimits.noise.band_psd` (one call for every band)
and of a baseline measured in the same run: ``scipy.integrate.quad`` of 1/S_n band by
band.  Also prints the largest relative difference between the two.
"""

import time

import astropy.units as u
import numpy as np
import scipy.integrate

from cwlimits.noise import band_psd, noise_model


def main():
    model = noise_model("advanced-fit")
    lo = np.arange(20.0, 2020.0, 0.1)  # 20 000 bands of 0.1 Hz
    hi = lo + 0.1

    t0 = time.perf_counter()
    fast = band_psd(model, lo * u.Hz, hi * u.Hz).to_value(u.Hz**-1)
    t_fast = (time.perf_counter() - t0) / lo.size

    n_base = 300  # a subset for the slow loop, spread over the range
    pick = np.linspace(0, lo.size - 1, n_base).astype(int)
    t0 = time.perf_counter()
    slow = np.empty(n_base)
    for j, k in enumerate(pick):
        inv, _ = scipy.integrate.quad(
            lambda f: 1.0 / model.psd(f * u.Hz).to_value(u.Hz**-1), lo[k], hi[k])
        slow[j] = (hi[k] - lo[k]) / inv
    t_base = (time.perf_counter() - t0) / n_base

    print(f"band_psd, {lo.size} bands in one call: {t_fast * 1e6:.2f} us per band")
    print(f"baseline quad loop ({n_base} bands):   {t_base * 1e6:.2f} us per band")
    print(f"speed-up: {t_base / t_fast:.0f}x; max relative difference "
          f"{np.max(np.abs(fast[pick] / slow - 1)):.1e}")


if __name__ == "__main__":
    main()
