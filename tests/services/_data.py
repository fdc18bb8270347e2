"""Invented test data for the services and API tests (a fictional district near 45.20°N, 110.60°W).

No real marks or people: codes, names and sources are made up.
"""

from __future__ import annotations

from typing import Any

ITRF2014_EPSG = 7912  # geographic 3D, dynamic (shared contracts)
NAD83_2011_EPSG = 6319  # geographic 3D, plate-fixed (shared contracts)


def position_data(**overrides: Any) -> dict[str, Any]:
    """A valid proposed position in ITRF2014 at 2020.0 (σ 5 mm E/N, 10 mm U)."""
    data: dict[str, Any] = {
        "frame_epsg": ITRF2014_EPSG,
        "epoch_yr": 2020.0,
        "lat_deg": 45.2012345678,
        "lon_deg": -110.6023456789,
        "h_m": 1523.4567,
        "cov_ee_m2": 0.005**2,
        "cov_nn_m2": 0.005**2,
        "cov_uu_m2": 0.010**2,
        "source": "Static campaign CR-2020 (invented)",
    }
    data.update(overrides)
    return data


def make_mark(actor, code: str = "QR-101", **fields: Any):
    from registry.services.marks import mark_create

    return mark_create(actor=actor, data={"code": code, "name": "Quarry Ridge", **fields})


def make_published(manager, technician, code: str = "QR-101", *, publish_note: str = "", **overrides: Any):
    """Propose and publish a position of ``code``; returns the published position.

    ``publish_note``: the reason to publish anyway, for invented data whose movement check shows possible
    movement (tests of other rules).
    """
    from registry.services.positions import position_propose, position_publish

    position = position_propose(actor=technician, mark_code=code, data=position_data(**overrides))
    return position_publish(actor=manager, position_id=position.pk, note=publish_note)
