"""Make ``plate_outlines.json``: coarse plate outlines for choosing a point's plate (run by hand).

    .venv/bin/pip download platemotion==0.1.7 --no-deps -d /tmp/pm
    .venv/bin/python registry/geodesy/data/make_plate_outlines.py /tmp/pm/platemotion-0.1.7-py3-none-any.whl

Source
------
The 56 closed plate outlines of NNR-MORVEL56 — D. F. Argus, R. G. Gordon, C. DeMets (2011),
"Geologically current motion of 56 plates relative to the no-net-rotation reference frame",
*Geochem. Geophys. Geosyst.* 12, Q11001, doi:10.1029/2011GC003751 — as published on the MORVEL
authors' page and redistributed in the folder ``platemotion/data/NnrMRVL_PltBndsLatLon`` of the
PyPI package ``platemotion`` 0.1.7 (C. Li, MIT licence; the folder's README names its origin).
Those outlines are P. Bird's PB2002 boundaries — P. Bird (2003), "An updated digital model of plate
boundaries", *Geochem. Geophys. Geosyst.* 4(3), 1027, doi:10.1029/2001GC000252 — rounded to 0.001°,
with MORVEL's divisions of some PB2002 plates (Nubia / Lwandle / Somalia, India / Capricorn,
Australia / Macquarie, South America / Sur, Sunda, Yangtze). Checked by hand: the first vertices of
PB2002's Africa outline in the GeoJSON transcription of PB2002 by H. Ahlenius (repository
"fraxen/tectonicplates", Open Data Commons Attribution licence 1.0) equal those of the Nubia and
North America outlines here to the 0.001° rounding. Credit: Peter Bird; Argus, Gordon and DeMets.

Processing (deterministic): consecutive duplicate vertices dropped; longitudes unwrapped along each
ring (a ring around a pole — Antarctica, North America — is marked with the pole it encloses);
each ring simplified by Douglas–Peucker with a tolerance of ``TOLERANCE_DEG`` (about 2 km), on
(longitude · cos latitude, latitude); vertices rounded to 0.001°. Each plate is mapped to the
ITRF2020 plate motion model's plate where the model has it (``PMM_OF``); the other 43 are kept so
that a point on them is recognised and refused by name, not silently given a neighbour's motion.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import sys
import zipfile
from pathlib import Path

import numpy as np

TOLERANCE_DEG = 0.02
FOLDER = "platemotion/data/NnrMRVL_PltBndsLatLon/"
POLES = "platemotion/data/NNR_MRV56.csv"
OUT = Path(__file__).with_name("plate_outlines.json")

#: NNR-MORVEL56 plate code → ITRF2020-PMM plate code (Altamimi et al. 2023). Same plate, same name,
#: except Nubia: MORVEL's "nb" is PB2002's Africa ("AF") west of the East African rift.
PMM_OF = {
    "am": "AMUR",
    "an": "ANTA",
    "ar": "ARAB",
    "au": "AUST",
    "ca": "CARB",
    "eu": "EURA",
    "in": "INDI",
    "na": "NOAM",
    "nb": "NUBI",
    "nz": "NAZC",
    "pa": "PCFC",
    "sa": "SOAM",
    "sm": "SOMA",
}


def douglas_peucker(xy: np.ndarray, tol: float) -> np.ndarray:
    """Indices kept by the Douglas–Peucker line simplification of an open polyline (iterative)."""
    keep = np.zeros(len(xy), dtype=bool)
    keep[0] = keep[-1] = True
    stack = [(0, len(xy) - 1)]
    while stack:
        i, j = stack.pop()
        if j <= i + 1:
            continue
        a, b = xy[i], xy[j]
        seg = b - a
        pts = xy[i + 1 : j] - a
        norm = float(np.hypot(*seg))
        if norm == 0.0:
            d = np.hypot(pts[:, 0], pts[:, 1])
        else:
            d = np.abs(seg[0] * pts[:, 1] - seg[1] * pts[:, 0]) / norm
        k = int(np.argmax(d))
        if d[k] > tol:
            m = i + 1 + k
            keep[m] = True
            stack += [(i, m), (m, j)]
    return np.flatnonzero(keep)


def simplify_ring(lon: np.ndarray, lat: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Simplify a closed ring (first vertex == last): split at the vertex farthest from the first."""
    x = lon * np.cos(np.radians(lat))
    xy = np.column_stack([x, lat])
    far = int(np.argmax(np.hypot(xy[:, 0] - xy[0, 0], xy[:, 1] - xy[0, 1])))
    first = douglas_peucker(xy[: far + 1], tol)
    second = douglas_peucker(xy[far:], tol) + far
    idx = np.concatenate([first, second[1:]])
    return lon[idx], lat[idx]


def main(wheel: str) -> None:
    raw = Path(wheel).read_bytes()
    digest = hashlib.sha256(raw).hexdigest()
    z = zipfile.ZipFile(io.BytesIO(raw))
    names = {}
    for row in csv.reader(io.TextIOWrapper(z.open(POLES), encoding="utf-8")):
        if len(row) >= 2 and row[1]:
            names[row[1]] = row[0]
    plates = []
    n_in = n_out = 0
    for info in sorted(z.infolist(), key=lambda i: i.filename):
        if not info.filename.startswith(FOLDER) or info.is_dir():
            continue
        base = info.filename[len(FOLDER) :]
        if base in ("All_boundaries",) or base.startswith("."):
            continue
        lines = z.read(info).decode("ascii").splitlines()
        code = lines[0].strip()
        rows = np.array([[float(v) for v in ln.split()] for ln in lines[1:] if ln.strip()])
        lat, lon = rows[:, 0], rows[:, 1]
        keep = np.ones(len(lat), dtype=bool)
        keep[1:] = (np.diff(lat) != 0) | (np.diff(lon) != 0)
        lat, lon = lat[keep], lon[keep]
        n_in += len(lat)
        lon = lon[0] + np.concatenate([[0.0], np.cumsum((np.diff(lon) + 180.0) % 360.0 - 180.0)])
        turn = round(float(lon[-1] - lon[0]) / 360.0)
        pole = None
        if turn != 0:
            pole = "S" if float(np.mean(lat)) < 0 else "N"
        else:
            lon[-1], lat[-1] = lon[0], lat[0]
        slon, slat = simplify_ring(lon, lat, TOLERANCE_DEG)
        n_out += len(slon)
        name = names.get(code) or next(v for k, v in names.items() if k.lower() == code.lower())
        plates.append(
            {
                "code": code,
                "name": name,
                "pmm": PMM_OF.get(code),
                "pole": pole,
                "ring": [[round(float(a), 3), round(float(b), 3)] for a, b in zip(slon, slat, strict=True)],
            }
        )
    doc = {
        "about": (
            "Coarse plate outlines (NNR-MORVEL56, Argus, Gordon & DeMets 2011, doi:10.1029/2011GC003751; "
            "boundaries of P. Bird's PB2002, doi:10.1029/2001GC000252), simplified by "
            "registry/geodesy/data/make_plate_outlines.py. Rings: [longitude, latitude] in degrees, "
            "longitudes unwrapped along the ring; 'pole' marks a ring that encloses that pole; 'pmm' is the "
            "ITRF2020 plate motion model's plate (null: not in the model)."
        ),
        "source": "platemotion-0.1.7-py3-none-any.whl (PyPI), folder " + FOLDER,
        "source_sha256": digest,
        "tolerance_deg": TOLERANCE_DEG,
        "vertices_in": n_in,
        "vertices_out": n_out,
        "plates": plates,
    }
    OUT.write_text(json.dumps(doc, separators=(",", ":")) + "\n", encoding="utf-8")
    print(f"{len(plates)} plates, {n_in} → {n_out} vertices, {OUT.stat().st_size} bytes → {OUT}")


if __name__ == "__main__":
    main(sys.argv[1])
