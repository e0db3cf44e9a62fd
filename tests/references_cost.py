"""Reference values for the parameter-space, metric, lattice and cost tests, with sources.

Same convention as ``references.py``: (value, unit, rtol, why the tolerance, source);
"(from memory)" marks a value recalled rather than read from the source, "(common
practice)" a fact of the trade.  Closed forms are given as functions with their source.
"""

import math

from references import Reference


def coherent_sqrt_det_3(t_s):
    """sqrt(det g) of (f, fdot, fddot) = pi^3 T^6 / (360 sqrt(105)), plain SI coordinates.

    The closed form quoted in the task (after Wette et al. 2008, arXiv:0802.3332, Sect. III;
    from memory); the tests confirm it by exact sympy integration.
    """
    return math.pi ** 3 * t_s ** 6 / (360 * math.sqrt(105))


def refinement_fdot(n):
    """gamma_1 = sqrt(5 N^2 - 4), contiguous segments (Pletsch 2010, arXiv:1005.0395)."""
    return math.sqrt(5 * n ** 2 - 4)


def refinement_fddot(n):
    """gamma_2 = sqrt((35 N^4 - 140 N^2 + 108) / 3) (Pletsch 2010, arXiv:1005.0395)."""
    return math.sqrt((35 * n ** 4 - 140 * n ** 2 + 108) / 3)


def ball_volume(n):
    """V_n = pi^(n/2) / Gamma(n/2 + 1) (Conway & Sloane, SPLAG, Ch. 1, Eq. (17); from memory
    for the equation number)."""
    return math.pi ** (n / 2) / math.gamma(n / 2 + 1)


def normalised_thickness_zn(n):
    """theta(Z^n) = n^(n/2) 2^(-n) (SPLAG Ch. 4, Sect. 4: covering radius of Z^n is
    sqrt(n)/2, determinant 1; Prix 2007, arXiv:0707.0428)."""
    return n ** (n / 2) * 2.0 ** -n


def normalised_thickness_anstar(n):
    """theta(A_n*) = sqrt(n+1) (n (n+2) / (12 (n+1)))^(n/2) (SPLAG Ch. 4, Sect. 6.6;
    Prix 2007, arXiv:0707.0428)."""
    return math.sqrt(n + 1) * (n * (n + 2) / (12 * (n + 1))) ** (n / 2)


#: Tabulated thicknesses Theta = V_n theta of the thinnest coverings, n = 1..4: A_n* is
#: optimal there (SPLAG Table 2.1; values from memory, to the 4 figures printed).
THICKNESS_ANSTAR_TABLE = {1: 1.0, 2: 1.2092, 3: 1.4635, 4: 1.7655}
THICKNESS_TABLE_RTOL = Reference(0.0, "", 1e-4, "table printed to 4-5 figures",
                                 "SPLAG Table 2.1 (from memory)")

#: Normalised second moment of the hexagonal lattice A_2 = A_2*: 5 / (36 sqrt 3).
G_A2 = Reference(5 / (36 * math.sqrt(3)), "", 2e-4,
                 "quasi-Monte-Carlo integration with 2^16 scrambled Sobol points",
                 "Conway & Sloane, SPLAG, Ch. 2, Table 2.3 (exact form)")
#: Normalised second moment of the body-centred cubic lattice A_3*.
G_A3STAR = Reference(0.0785433, "", 3e-4,
                     "quasi-Monte-Carlo integration with 2^16 scrambled Sobol points",
                     "Conway & Sloane, SPLAG, Ch. 2, Table 2.3 (from memory)")
#: Normalised second moment of the cube Z^n: 1/12 for every n (uniform offsets, variance
#: 1/12 per coordinate; common practice).
G_ZN = 1 / 12
