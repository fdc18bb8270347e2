"""Antenna height: reduce a measured height to the vertical height of the antenna reference point (ARP).

Source
------
Slant to vertical by Pythagoras, then a vertical offset to the ARP:

    h_ARP = √(s² − r²) + Δh

s : slant distance from the mark to the slant-measure point on the antenna rim (metres);
r : horizontal radius of that point from the antenna axis, half the rim diameter (metres);
Δh : vertical offset **from the slant-measure plane to the ARP** = height(ARP) − height(plane).
     **Negative when the ARP lies below the slant-measure plane**, which is the usual case (the ARP is
     the bottom of the mount, the rim is above it).

This is the reduction a GNSS data-preparation tool documents as "dh + sqrt(s² − (d/2)²)", and the
antenna radius / offset pairs come from the manufacturer's antenna tables (as tabulated in a GNSS
receiver manual; secondary transcription). The height written to RINEX ("ANTENNA: DELTA H/E/N")
is the vertical mark→ARP distance this module returns. Antenna phase-centre offsets (ARP → phase
centre) are not applied here.

No Django import. Functions take scalars or numpy arrays and return the same shape.
"""

from __future__ import annotations

import numpy as np

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.arraytypes import ArrayLike, FloatArray, FloatOrArray

__all__ = ["HEIGHT_KINDS", "antenna_height_arp_m", "slant_to_vertical_arp_m"]

#: How a height was measured: straight up to the ARP ("vertical") or to the rim ("slant").
HEIGHT_KINDS = ("vertical", "slant")


def _arr(value: ArrayLike, name: str) -> FloatArray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ComputationInputError(f"{name} must be a number.", code="not_a_number", params={"name": name}) from exc
    if not np.all(np.isfinite(arr)):
        raise ComputationInputError(f"{name} must be finite.", code="not_finite", params={"name": name})
    return arr


def slant_to_vertical_arp_m(slant_m: ArrayLike, radius_m: ArrayLike, arp_offset_m: ArrayLike = 0.0) -> FloatOrArray:
    """Vertical height of the ARP above the mark from a slant measurement: √(s² − r²) + Δh.

    Parameters
    ----------
    slant_m : float or array_like
        Slant distance mark → slant-measure point (m), > 0.
    radius_m : float or array_like
        Radius of the slant-measure point from the antenna axis (m), ≥ 0.
    arp_offset_m : float or array_like
        Δh = height(ARP) − height(slant-measure plane), m; negative when the ARP is below the plane.

    Returns
    -------
    float or ndarray
        Vertical distance mark → ARP (m).

    Raises
    ------
    ComputationInputError
        ``slant_shorter_than_radius`` when s < r (the tape cannot reach the rim), ``negative_length``
        for a negative slant or radius.

    Examples
    --------
    >>> round(slant_to_vertical_arp_m(1.532, 0.0921, -0.0516), 5)
    1.47763
    """
    s = _arr(slant_m, "slant height")
    r = _arr(radius_m, "antenna radius")
    dh = _arr(arp_offset_m, "ARP offset")
    s, r, dh = np.broadcast_arrays(s, r, dh)
    if np.any(s <= 0.0) or np.any(r < 0.0):
        raise ComputationInputError(
            "Slant height must be positive and the radius not negative.", code="negative_length"
        )
    if np.any(s < r):
        raise ComputationInputError(
            "The slant height is shorter than the antenna radius; check the measurement and the antenna.",
            code="slant_shorter_than_radius",
        )
    out = np.sqrt((s - r) * (s + r)) + dh
    return out.item() if out.ndim == 0 else out


def antenna_height_arp_m(
    height_m: ArrayLike, *, kind: str, radius_m: ArrayLike | None = None, arp_offset_m: ArrayLike = 0.0
) -> FloatOrArray:
    """Height mark → ARP from a measured height of either kind.

    ``kind="vertical"``: the measurement is already mark → ARP and is returned unchanged.
    ``kind="slant"``: reduced with :func:`slant_to_vertical_arp_m`; ``radius_m`` is required.

    Examples
    --------
    >>> antenna_height_arp_m(1.5, kind="vertical")
    1.5
    >>> round(antenna_height_arp_m(2.000, kind="slant", radius_m=0.0953, arp_offset_m=-0.0483), 5)
    1.94943
    """
    if kind == "vertical":
        h = _arr(height_m, "antenna height")
        if np.any(h < 0.0):
            raise ComputationInputError("An antenna height cannot be negative.", code="negative_length")
        return h.item() if h.ndim == 0 else h
    if kind == "slant":
        if radius_m is None:
            raise ComputationInputError("A slant height needs the antenna radius.", code="radius_missing")
        return slant_to_vertical_arp_m(height_m, radius_m, arp_offset_m)
    raise ComputationInputError(
        "The height kind must be 'vertical' or 'slant'.", code="bad_height_kind", params={"kind": kind}
    )
