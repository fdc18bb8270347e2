"""An invented corner of the fictional Kestrel Valley district, for page and browser tests.

All names, codes, people and values are invented. The marks are built through the
services (so their audit history and search locations are real); height records,
which have no service yet, are inserted directly. Call inside a test with a database.
"""

from __future__ import annotations

import datetime as dt
import struct
import zlib

from django.core.files.base import ContentFile


def tiny_png() -> bytes:
    """A valid 4×3 grey PNG (built here, no image library needed)."""
    width, height = 4, 3
    raw = b"".join(b"\x00" + b"\x80" * width for _ in range(height))

    def chunk(tag: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xFFFFFFFF)

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b"")


def position_data(**overrides):
    data = {
        "frame_epsg": 7912,
        "epoch_yr": 2010.0,
        "lat_deg": 45.2,
        "lon_deg": -110.6,
        "h_m": 1523.4567,
        "cov_ee_m2": 0.004**2,
        "cov_nn_m2": 0.003**2,
        "cov_uu_m2": 0.009**2,
        "source": "2010 district GNSS campaign, adjustment KV-A1",
    }
    data.update(overrides)
    return data


def build_kestrel(manager, technician, *, photo_png: bytes | None = None):
    """Three marks with positions in every state, a visit, an occupation, a photo, a RINEX file and history.

    Returns a dict with the marks and the positions by name.
    """
    from registry.models import HeightMethod, HeightRecord
    from registry.services.fieldwork import attachment_add, occupation_record, visit_record
    from registry.services.marks import mark_create, mark_set_status, mark_update
    from registry.services.positions import position_propose, position_publish, position_reject

    ridge = mark_create(
        actor=manager,
        data={
            "code": "KV-001",
            "name": "Kestrel Ridge",
            "monument": "disk_rock",
            "monument_detail": "Bronze disk cemented in a drill hole in granite outcrop",
            "stability": "high",
            "marking": "KESTREL RIDGE 2009",
            "access_directions": "From the Mill Creek road bridge go 2.4 km north on the ranch track to the gate; the outcrop is 40 m east.",
            "sky_view": "clear",
            "keeper": "Kestrel Valley Survey Office",
        },
    )
    bridge = mark_create(
        actor=manager,
        data={
            "code": "KV-002",
            "name": "Mill Creek Bridge",
            "monument": "bolt_structure",
            "marking": "MC BR 1998",
            "keeper": "Alder County Roads",
            "sky_view": "partial",
        },
    )
    quarry = mark_create(
        actor=manager,
        data={"code": "HW-07", "name": "Old Quarry", "monument": "iron_pipe", "keeper": "Hawthorn Township"},
    )
    quarry = mark_set_status(
        actor=manager, code="HW-07", status="retired", expected_version=1, note="Quarry reopened; mark inaccessible."
    )

    first = position_propose(actor=technician, mark_code="KV-001", data=position_data())
    position_publish(actor=manager, position_id=first.pk)
    second = position_propose(
        actor=technician,
        mark_code="KV-001",
        data=position_data(
            epoch_yr=2020.5,
            lat_deg=45.200000123,
            lon_deg=-110.600000456,
            h_m=1523.4512,
            vel_e_m_yr=-0.0121,
            vel_n_m_yr=-0.0043,
            vel_u_m_yr=0.0008,
            source="2020 re-observation, 3 × 6 h static",
        ),
    )
    # The 2009 values were wrong by far more than their σ (the movement check says so): published with the reason.
    position_publish(
        actor=manager, position_id=second.pk, note="2009 values were scaled from the station sketch; replaced."
    )
    # 2024 check in ITRF2020: the 2020 position moved along its velocity for 3.75 years (about −45 mm east,
    # −16 mm north, +3 mm up), so the movement check finds no movement.
    proposed = position_propose(
        actor=technician,
        mark_code="KV-001",
        data=position_data(
            frame_epsg=9989,
            epoch_yr=2024.25,
            lat_deg=45.199999978,
            lon_deg=-110.600001035,
            h_m=1523.4542,
            source="2024 check session (ITRF2020)",
        ),
    )
    rejected = position_propose(
        actor=technician,
        mark_code="KV-001",
        data=position_data(epoch_yr=2023.0, h_m=1523.600, source="RTK tie, wrong antenna height"),
    )
    position_reject(actor=manager, position_id=rejected.pk, note="Antenna height recorded to the wrong point.")
    # Its movement check (15 cm up, 137 m from the 2020 position) made the mark suspect; the manager clears it.
    from registry.services.suspect import mark_clear_suspect

    ridge.refresh_from_db()
    mark_clear_suspect(
        actor=manager,
        code="KV-001",
        note="The difference came from the wrong antenna height of a rejected proposal, not from the mark.",
        expected_version=ridge.version,
    )
    bridge_pos = position_propose(
        actor=technician, mark_code="KV-002", data=position_data(lat_deg=45.1875, lon_deg=-110.6342, h_m=1498.002)
    )
    position_publish(actor=manager, position_id=bridge_pos.pk)

    HeightRecord.objects.create(
        mark=ridge,
        datum_epsg=5703,
        height_m=1538.912,
        sigma_m=0.012,
        method=HeightMethod.LEVELLED,
        source="2011 levelling line KV-L2",
    )
    visit = visit_record(
        actor=technician,
        mark_code="KV-001",
        data={
            "visited_on": "2024-04-18",
            "finding": "intact",
            "visitor": "T. Field (invented)",
            "notes": "Disk clean, marking legible.",
        },
    )
    occupation = occupation_record(
        actor=technician,
        mark_code="KV-001",
        data={
            "method": "static_gnss",
            "start_utc": "2020-07-01T15:00:00Z",
            "end_utc": "2020-07-01T21:00:00Z",
            "observer": "T. Field (invented)",
            "receiver": "Receiver model A",
            "antenna": "Antenna model B",
            "antenna_height_measured_m": 1.5,
            "result_position_id": second.pk,
        },
    )
    photo = attachment_add(
        actor=technician,
        mark_code="KV-001",
        file=ContentFile(photo_png or tiny_png(), name="kv001-north.png"),
        kind="photo",
        visit_id=visit.pk,
        caption="Looking north",
    )
    rinex = attachment_add(
        actor=technician,
        mark_code="KV-001",
        file=ContentFile(
            b"     3.04           OBSERVATION DATA    M                   RINEX VERSION / TYPE\n", name="kv0011830.24o"
        ),
        kind="rinex",
        occupation_id=occupation.pk,
    )
    ridge.refresh_from_db()  # (movement checks made it suspect; publishing and a clearance made it active again)
    ridge = mark_update(
        actor=manager,
        code="KV-001",
        expected_version=ridge.version,
        changes={"keeper": "Kestrel Valley Survey Office, Room 4"},
    )
    ridge.refresh_from_db()
    bridge.refresh_from_db()
    quarry.refresh_from_db()
    return {
        "ridge": ridge,
        "bridge": bridge,
        "quarry": quarry,
        "first": first,
        "second": second,
        "proposed": proposed,
        "rejected": rejected,
        "visit": visit,
        "occupation": occupation,
        "photo": photo,
        "rinex": rinex,
        "when": dt.datetime.now(dt.UTC),
    }


# Invented neighbours of the Kestrel Valley marks, for a list that looks like a working registry.
NEIGHBOURS = [
    ("KV-003", "Heron Point", "deep_rod", "Kestrel Valley Survey Office", 45.2213, -110.5877, "intact"),
    ("KV-004", "Granary Corner", "disk_concrete", "Alder County Roads", 45.1932, -110.6121, "damaged"),
    ("KV-005", "Larkspur Tank", "bolt_structure", "Larkspur Water Co-op", 45.2377, -110.6415, "intact"),
    ("KV-006", "Schoolhouse Flat", "pin_concrete", "Kestrel Valley Survey Office", 45.1788, -110.5702, "disturbed"),
    ("KV-007", "Wren Gulch", "disk_rock", "Kestrel Valley Survey Office", 45.2541, -110.5519, None),
    ("KV-008", "Saddle Pillar", "pillar", "Kestrel Valley Survey Office", 45.2104, -110.6633, "intact"),
    ("AC-101", "County Yard", "disk_concrete", "Alder County Roads", 45.1650, -110.6248, "searched_not_found"),
    ("AC-102", "Ferry Landing", "iron_pipe", "Alder County Roads", 45.1519, -110.5934, None),
]


def build_neighbours(manager, technician):
    """Eight more invented marks with one published ITRF2014 position each, and some visits."""
    from registry.services.fieldwork import visit_record
    from registry.services.marks import mark_create
    from registry.services.positions import position_propose, position_publish

    for i, (code, name, monument, keeper, lat, lon, finding) in enumerate(NEIGHBOURS):
        mark_create(
            actor=manager,
            data={
                "code": code,
                "name": name,
                "monument": monument,
                "keeper": keeper,
                "marking": f"{code} 2012",
            },
        )
        p = position_propose(
            actor=technician,
            mark_code=code,
            data=position_data(
                lat_deg=lat,
                lon_deg=lon,
                h_m=1480.0 + 7.31 * i,
                epoch_yr=2012.0 + 0.25 * i,
                cov_ee_m2=(0.004 + 0.001 * i) ** 2,
                cov_nn_m2=(0.004 + 0.001 * i) ** 2,
                source="2012 district GNSS campaign, adjustment KV-A2",
            ),
        )
        position_publish(actor=manager, position_id=p.pk)
        if finding:
            visit_record(
                actor=technician, mark_code=code, data={"visited_on": f"2023-0{1 + i % 9}-15", "finding": finding}
            )


def illustration_png(text: str = "KV-001") -> bytes:
    """An invented illustration standing in for a mark photo (a disk on rock), drawn with Pillow."""
    import io

    from PIL import Image, ImageDraw

    img = Image.new("RGB", (400, 300), (141, 132, 118))
    draw = ImageDraw.Draw(img)
    for k in range(0, 400, 23):
        draw.line([(k, 0), (k - 120, 300)], fill=(126, 118, 104), width=3)
    draw.ellipse([140, 90, 260, 210], fill=(176, 132, 70), outline=(92, 64, 30), width=4)
    draw.ellipse([194, 144, 206, 156], fill=(92, 64, 30))
    draw.text((172, 118), text, fill=(60, 40, 16))
    buf = io.BytesIO()
    img.save(buf, format="PNG")
    return buf.getvalue()
