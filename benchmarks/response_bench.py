"""Speed of cwlimits.response.time_averages (moments over LST) against a brute time
average of a(t)^2 on the same grid, for many targets.  Prints ratios measured in this run."""

import time

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord

from cwlimits import response as resp

START, SPAN = "2027-01-01T00:00:00", 30 * u.d
rng = np.random.default_rng(0)


def targets(n):
    return SkyCoord(ra=rng.uniform(0, 360, n) * u.deg,
                    dec=np.degrees(np.arcsin(rng.uniform(-1, 1, n))) * u.deg)


def brute(coord):
    days = (SPAN / resp.SIDEREAL_DAY).to_value(u.one)
    count = max(64, int(np.ceil(days * 48)))
    times = resp._as_time(START) + (np.arange(count) + 0.5) / count * SPAN
    a, b = resp.amplitude_modulation("H1", coord[:, None], times[None, :])
    return np.mean(a.value**2, axis=-1)


resp.time_averages("H1", targets(2), START, SPAN)  # warm-up: imports, IERS table
for n in (10, 100, 1000, 10000):
    coord = targets(n)
    t0 = time.perf_counter()
    fast = resp.time_averages("H1", coord, START, SPAN, method="sampled").A_det[0].value
    t1 = time.perf_counter()
    slow = brute(coord)
    t2 = time.perf_counter()
    print(f"{n:5d} targets: time_averages {t1 - t0:.3f} s, brute {t2 - t1:.3f} s, "
          f"ratio {(t2 - t1) / (t1 - t0):.1f}, max |dA| {np.max(np.abs(fast - slow)):.1e}")

t0 = time.perf_counter()
resp.time_averages("H1,L1,V1", targets(1), START, 365.25 * u.d)
print(f"one target, three detectors, one year: {time.perf_counter() - t0:.3f} s")
