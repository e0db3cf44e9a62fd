"""Simulated data and searches, to check the sensitivity model against.

:mod:`.synthetic` simulates strain; :mod:`.fstat` computes the F-statistic and the StackSlide
sum on it; :mod:`.campaigns` runs injection campaigns and compares measured with predicted
h0; :mod:`.mocksearch` is the directed mock search of a setup (barycentric resampling,
lattice template banks, StackSlide).
"""

from cwlimits.simulation import campaigns, fstat, mockcampaign, mocksearch, synthetic
from cwlimits.simulation.campaigns import *  # noqa: F403
from cwlimits.simulation.fstat import *  # noqa: F403
from cwlimits.simulation.mockcampaign import *  # noqa: F403
from cwlimits.simulation.mocksearch import *  # noqa: F403
from cwlimits.simulation.synthetic import *  # noqa: F403

__all__ = [
    *campaigns.__all__,
    *fstat.__all__,
    *mockcampaign.__all__,
    *mocksearch.__all__,
    *synthetic.__all__,
]
