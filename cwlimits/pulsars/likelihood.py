"""The time-domain likelihood of a known pulsar's signal in down-converted data.

Derivation
----------
Data heterodyned with the pulsar's full phase model (spin, spin-down, Doppler) and
low-passed are, for one detector at sample k (Dupuis & Woan 2005, arXiv:gr-qc/0508096,
eq. 4, for a complex heterodyne without a factor 2),

    B_k = y_k + n_k,
    y_k = (h0/4)(1 + cos^2 iota) F+_k e^{i phi0} - (i h0/2) cos iota Fx_k e^{i phi0},

with F+ = a cos 2psi + b sin 2psi and Fx = b cos 2psi - a sin 2psi (Jaranowski, Krolak &
Schutz 1998, gr-qc/9804014, eqs. 10-11; a, b include the sin(zeta) of the arms).  Written
as y_k = h0 e^{i phi0} (a_k P + b_k Q), the orientation enters only through the two complex
numbers

    P = (1 + cos^2 iota)/4 cos 2psi + (i cos iota / 2) sin 2psi,
    Q = (1 + cos^2 iota)/4 sin 2psi - (i cos iota / 2) cos 2psi,

and every likelihood needs, per stretch j of data, only the sums
S_BB = sum |B|^2, U = sum B a, V = sum B b, S_aa = sum a^2, S_bb = sum b^2, S_ab = sum a b:

    sum_k |B_k - y_k|^2 = S_BB - 2 h0 Re(e^{-i phi0} X) + h0^2 Y,
    X = P* U + Q* V,   Y = |P|^2 S_aa + |Q|^2 S_bb + 2 Re(P Q*) S_ab.

* **Known noise** (sigma_j per real component): ln L = sum_j [h0 Re(e^{-i phi0} X_j) -
  h0^2 Y_j / 2] / sigma_j^2 + const; the uniform phi0 integrates to
  I0(h0 |X|) exp(-h0^2 Y / 2) with X, Y the 1/sigma^2-weighted sums (a von Mises integral,
  Abramowitz & Stegun 9.6.16).
* **Unknown noise per stretch** with a Jeffreys prior 1/sigma_j marginalised: each stretch
  of m_j complex samples gives (sum_k |B_k - y_k|^2)^(-m_j), a Student-t likelihood
  (Dupuis & Woan 2005, eq. 6).  Here phi0 is integrated on a grid.

Under noise alone U and V (weighted by 1/sigma^2) are circular complex Gaussian with
E[U U*] = 2 S_aa, E[V V*] = 2 S_bb, E[U V*] = 2 S_ab: this is how the expected limit is
computed without simulating time series (:func:`noise_only_sums`).
"""

import numpy as np
from scipy import special

__all__ = ["StretchSums", "orientation_coefficients", "known_noise_log_likelihood",
           "student_log_likelihood", "noise_only_sums", "combine_stretches"]


class StretchSums:
    """The per-stretch sums of the data and antenna patterns (plain float arrays).

    Attributes
    ----------
    m : ndarray of int, shape (J,)
        Complex samples per stretch.
    s_bb, s_aa, s_bb_pat, s_ab : ndarray, shape (J,)
        sum |B|^2, sum a^2, sum b^2, sum a b.
    u, v : ndarray of complex, shape (J,)
        sum B a and sum B b.
    sigma : ndarray, shape (J,)
        Noise standard deviation per real component (NaN where unknown).
    detector : ndarray of str, shape (J,)
        Detector of each stretch.
    """

    def __init__(self, m, s_bb, u, v, s_aa, s_bb_pat, s_ab, sigma, detector):
        self.m = np.asarray(m, dtype=int)
        self.s_bb = np.asarray(s_bb, dtype=float)
        self.u, self.v = np.asarray(u, dtype=complex), np.asarray(v, dtype=complex)
        self.s_aa = np.asarray(s_aa, dtype=float)
        self.s_bb_pat = np.asarray(s_bb_pat, dtype=float)
        self.s_ab = np.asarray(s_ab, dtype=float)
        self.sigma = np.asarray(sigma, dtype=float)
        self.detector = np.asarray(detector, dtype=str)

    def __len__(self):
        return len(self.m)

    def weighted(self):
        """(U, V, S_aa, S_bb, S_ab) summed over stretches with weights 1 / sigma_j^2."""
        w = 1.0 / self.sigma**2
        return (np.sum(w * self.u), np.sum(w * self.v), np.sum(w * self.s_aa),
                np.sum(w * self.s_bb_pat), np.sum(w * self.s_ab))


def combine_stretches(sums):
    """One :class:`StretchSums` from several (e.g. one per detector)."""
    fields = ("m", "s_bb", "u", "v", "s_aa", "s_bb_pat", "s_ab", "sigma", "detector")
    return StretchSums(*(np.concatenate([getattr(s, f) for s in sums]) for f in fields))


def orientation_coefficients(cosi, psi, harmonic="22"):
    """P and Q of the module notes (broadcast over ``cosi`` and ``psi`` in rad).

    ``harmonic='22'``: the l = m = 2 signal in units of h0 (plus (1 + cos^2 iota)/4,
    cross cos iota / 2).  ``harmonic='21'``: the l = 2, m = 1 signal at f_rot in units of
    C21, h_21 = -C21 [F+ sin iota cos iota cos Phi + Fx sin iota sin Phi] (Jones 2015,
    arXiv:1501.05832; Pitkin et al. 2015, arXiv:1508.00416, eq. 2), whose heterodyned form
    has plus sin iota cos iota / 2 and cross sin iota / 2 (the overall sign is a phase).
    """
    cosi, psi = np.asarray(cosi, float), np.asarray(psi, float)
    if harmonic == "21":
        sini = np.sqrt(np.clip(1 - cosi**2, 0.0, 1.0))
        plus, cross = sini * cosi / 2, sini / 2
    else:
        plus, cross = (1 + cosi**2) / 4, cosi / 2
    c2, s2 = np.cos(2 * psi), np.sin(2 * psi)
    return plus * c2 + 1j * cross * s2, plus * s2 - 1j * cross * c2


def _xy(p, q, u, v, s_aa, s_bb, s_ab):
    x = np.conj(p) * u + np.conj(q) * v
    y = np.abs(p) ** 2 * s_aa + np.abs(q) ** 2 * s_bb + 2 * np.real(p * np.conj(q)) * s_ab
    return x, y


def known_noise_log_likelihood(h0, p, q, u, v, s_aa, s_bb, s_ab):
    """Ln L (up to a constant) with phi0 marginalised, for 1/sigma^2-weighted sums.

    ``h0`` broadcasts against ``p`` and ``q``; ``u ... s_ab`` are scalars (or broadcast).
    ln L = ln I0(h0 |X|) - h0^2 Y / 2 (module notes), with the exponentially scaled Bessel
    function of scipy for stability.
    """
    x, y = _xy(p, q, u, v, s_aa, s_bb, s_ab)
    z = h0 * np.abs(x)
    return np.log(special.i0e(z)) + z - h0**2 * y / 2


def student_log_likelihood(h0, phi0, p, q, sums):
    """Ln L (up to a constant) with the noise of every stretch marginalised (Student-t).

    ``h0``, ``phi0``, ``p``, ``q`` broadcast together; the stretches are summed over.
    ln L = -sum_j m_j ln(S_BB,j - 2 h0 Re(e^{-i phi0} X_j) + h0^2 Y_j) (Dupuis & Woan 2005,
    eq. 6).
    """
    h0, phi0, p, q = np.broadcast_arrays(*(np.asarray(a) for a in (h0, phi0, p, q)))
    rot = np.exp(-1j * phi0)
    total = np.zeros(h0.shape)
    for j in range(len(sums)):
        x, y = _xy(p, q, sums.u[j], sums.v[j], sums.s_aa[j], sums.s_bb_pat[j], sums.s_ab[j])
        resid = sums.s_bb[j] - 2 * h0 * np.real(rot * x) + h0**2 * y
        total -= sums.m[j] * np.log(np.maximum(resid, 1e-300 * sums.s_bb[j]))
    return total


def noise_only_sums(s_aa, s_bb, s_ab, size, rng):
    """Draws of the weighted (U, V) of noise-only data (module notes), shape (size,)."""
    cov = np.array([[s_aa, s_ab], [s_ab, s_bb]])
    chol = np.linalg.cholesky(cov + 1e-15 * np.trace(cov) * np.eye(2))
    z = rng.standard_normal((2, 2, size))  # (real/imag, component, draw), unit variance
    w = z[0] + 1j * z[1]  # E|w|^2 = 2
    uv = chol @ w
    return uv[0], uv[1]
