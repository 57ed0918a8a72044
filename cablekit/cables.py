"""Cables as they really are: elastic stretch, sag (Irvine's elastic catenary), Ernst's modulus.

SI inside: lengths [m], forces [N], axial stiffness EA [N], weight per metre [N/m].
"""

from __future__ import annotations

import numpy as np

__all__ = ["elastic_stretch"]


def elastic_stretch(tension, length, axial_stiffness):
    """Elastic elongation of a straight cable, ``T * L / EA``.

    Parameters
    ----------
    tension : float or array_like
        Cable tension T [N].
    length : float or array_like
        Cable length L [m] (unstretched or free length; the difference is second order).
    axial_stiffness : float or array_like
        Axial stiffness E*A of the rope [N].

    Returns
    -------
    numpy.ndarray or float
        Elongation [m], broadcast over the inputs.

    Raises
    ------
    ValueError
        If the axial stiffness is not a finite positive number.

    Notes
    -----
    Hooke's law for a bar in tension, delta = T L / (E A).

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 1.
    """
    ea = np.asarray(axial_stiffness, dtype=float)
    if not np.all(np.isfinite(ea)) or np.any(ea <= 0.0):
        raise ValueError(f"axial_stiffness must be finite and > 0 [N], got {axial_stiffness!r}")
    out = np.asarray(tension, dtype=float) * np.asarray(length, dtype=float) / ea
    return float(out) if out.ndim == 0 else out
