"""Figures: the only subpackage that imports matplotlib.

:mod:`.figures` holds the shared pieces (figure sizes, the save step with its ownership
mark); :mod:`.limits`, :mod:`.planning`, :mod:`.noise` and :mod:`.pulsars` draw the figures
of their stage.  Every axis carries a label with its unit.
"""

__all__ = []
