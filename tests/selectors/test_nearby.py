"""Nearby-mark search: both candidate paths against a brute-force reference, on both databases.

Run this module on SQLite (default) and on PostgreSQL + PostGIS
(``DATABASE_URL=postgres://...``). On PostgreSQL the PostGIS path and the portable path
are both run and must agree with each other and with the reference.

Reference: every mark's exact geodesic distance on GRS80 computed over the whole fixture
(no index, no box), filtered and sorted (distance, then code) by plain Python written
for the test. Distances of returned marks are cross-checked with GeographicLib 2.1
(Karney 2013, an independent implementation of the same geodesic algorithm) to 1 µm.
All marks are invented: random points in a fictional district near 45.2°N 110.6°W, on
the antimeridian, around both poles and at 0°N 0°E.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pyproj
import pytest
from django.db import connection, transaction
from geographiclib.geodesic import Geodesic

from registry.errors import InvalidInput
from registry.models import Finding, Mark, MarkStatus, Position, PositionState, Stability, Visit
from registry.selectors.nearby import marks_near

pytestmark = pytest.mark.django_db

#: GRS80 (Moritz 1980, Bulletin Géodésique 54:395–405): a = 6 378 137 m, 1/f = 298.257222101.
GRS80_GEODESIC = Geodesic(6378137.0, 1 / 298.257222101)
GEOD = pyproj.Geod(ellps="GRS80")
AS_OF = dt.date(2026, 6, 30)
FRAMES = (7912, 6319, 9989)

ON_PG = connection.vendor == "postgresql"
PATHS = ["portable", "postgis"] if ON_PG else ["portable"]

# Cluster centres (lat, lon, half-width lat°, half-width lon°) of the invented marks.
CLUSTERS = [
    (45.2, -110.6, 0.25, 0.35),  # fictional district, UTM 12N
    (-17.6, 180.0, 0.2, 0.25),  # astride the antimeridian
    (89.8, 0.0, 0.2, 180.0),  # around the north pole
    (-89.85, 0.0, 0.15, 180.0),  # around the south pole
    (0.0, 0.0, 0.1, 0.1),  # equator / prime meridian
]


def _wrap_lon(lon):
    return np.mod(np.asarray(lon) + 180.0, 360.0) - 180.0


class World:
    """The invented marks, with everything the reference filters need kept in memory."""

    def __init__(self, seed: int = 20260601, per_cluster: int = 200):
        rng = np.random.default_rng(seed)
        lats, lons = [], []
        for clat, clon, hlat, hlon in CLUSTERS:
            lat = np.clip(clat + rng.uniform(-hlat, hlat, per_cluster), -90.0, 90.0)
            lon = _wrap_lon(clon + rng.uniform(-hlon, hlon, per_cluster))
            lats.append(lat)
            lons.append(lon)
        lat = np.concatenate(lats)
        lon = np.concatenate(lons)
        # Exactly on the antimeridian (both spellings), exactly at both poles, and a
        # stack of five marks on one spot (ties broken by code).
        extra = [(-17.6, 180.0), (-17.61, -180.0), (90.0, 0.0), (90.0, 123.0), (-90.0, -45.0)] + [(45.21, -110.61)] * 5
        lat = np.concatenate([lat, [e[0] for e in extra]])
        lon = np.concatenate([lon, [e[1] for e in extra]])
        n = lat.size
        # Codes in an order unrelated to position, so "ties by code" is really tested.
        perm = rng.permutation(n)
        self.codes = [f"M{perm[i]:05d}" for i in range(n)]
        self.lat = lat
        self.lon = lon
        self.status = rng.choice(MarkStatus.values, n, p=[0.7, 0.1, 0.1, 0.1])  # active, suspect, retired, destroyed
        self.stability = rng.choice(Stability.values, n)
        # Published positions: a random subset of frames per mark, with random E/N covariances.
        self.positions: list[tuple[int, int, float, float, float]] = []  # (mark index, frame, ee, en, nn)
        for i in range(n):
            for frame in FRAMES:
                if rng.random() < 0.5:
                    s_e, s_n = rng.uniform(0.002, 0.04, 2)
                    rho = rng.uniform(-0.8, 0.8)
                    self.positions.append((i, frame, s_e**2, rho * s_e * s_n, s_n**2))
        # Visits: finding and date.
        self.visits: list[tuple[int, str, dt.date]] = []
        for i in range(n):
            for _ in range(rng.integers(0, 3)):
                cond = rng.choice(["intact", "damaged", "disturbed", "searched_not_found"], p=[0.5, 0.2, 0.2, 0.1])
                days_ago = int(rng.integers(0, 12 * 365))
                self.visits.append((i, str(cond), AS_OF - dt.timedelta(days=days_ago)))
        self.with_location = np.ones(n, dtype=bool)

    def save(self):
        marks = Mark.objects.bulk_create(
            [
                Mark(
                    code=self.codes[i],
                    search_lat_deg=float(self.lat[i]),
                    search_lon_deg=float(self.lon[i]),
                    status=str(self.status[i]),
                    stability=str(self.stability[i]),
                )
                for i in range(len(self.codes))
            ]
        )
        # Two marks without a search location: never found.
        Mark.objects.bulk_create([Mark(code="NOWHERE1"), Mark(code="NOWHERE2", status=MarkStatus.ACTIVE)])
        self.pk = np.array([m.pk for m in marks])
        Position.objects.bulk_create(
            [
                Position(
                    mark_id=int(self.pk[i]),
                    frame_epsg=frame,
                    epoch_yr=2020.0,
                    lat_deg=float(self.lat[i]),
                    lon_deg=float(self.lon[i]),
                    h_m=100.0,
                    cov_ee_m2=ee,
                    cov_en_m2=en,
                    cov_nn_m2=nn,
                    cov_uu_m2=4e-4,
                    source="invented test solution",
                    state=PositionState.PUBLISHED,
                )
                for i, frame, ee, en, nn in self.positions
            ]
        )
        Visit.objects.bulk_create(
            [Visit(mark_id=int(self.pk[i]), visited_on=day, finding=cond) for i, cond, day in self.visits]
        )
        return self


@pytest.fixture
def world():
    return World().save()


def r95_reference_m(ee, en, nn):
    """FGDC-STD-007.2-1998 circular 95 % radius, computed independently of the code:
    eigenvalues by numpy.linalg.eigvalsh, K polynomial as printed in the standard
    (coefficients: secondary transcription, Geoscience Australia geodesy package)."""
    lam = np.linalg.eigvalsh(np.array([[ee, en], [en, nn]]))
    s_min, s_max = math.sqrt(max(lam[0], 0.0)), math.sqrt(max(lam[1], 0.0))
    c = s_min / s_max if s_max > 0 else 0.0
    return (1.960790 + 0.004071 * c + 0.114276 * c**2 + 0.371625 * c**3) * s_max


def reference(world: World, lat, lon, radius_m, limit=None, **filters):
    """Brute force over every invented mark: exact distance, filters, order (distance, code)."""
    n = len(world.codes)
    d = np.asarray(GEOD.inv(np.full(n, lon, dtype=float), np.full(n, lat, dtype=float), world.lon, world.lat)[2])
    ok = d <= radius_m
    if filters.get("status") is not None:
        ok &= np.isin(world.status, list(np.atleast_1d(filters["status"])))
    if filters.get("stability") is not None:
        ok &= np.isin(world.stability, list(np.atleast_1d(filters["stability"])))
    frame = filters.get("frame_epsg")
    if frame is not None:
        has = {i for i, f, *_ in world.positions if f == frame}
        ok &= np.array([i in has for i in range(n)])
    if filters.get("intact_visit_within_yr") is not None:
        cutoff = AS_OF - dt.timedelta(days=math.floor(filters["intact_visit_within_yr"] * 365.25))
        has = {i for i, cond, day in world.visits if cond == "intact" and day >= cutoff}
        ok &= np.array([i in has for i in range(n)])
    acc = filters.get("accuracy_class_max_m")
    if acc is not None:
        has = {
            i
            for i, f, ee, en, nn in world.positions
            if (frame is None or f == frame) and r95_reference_m(ee, en, nn) <= acc
        }
        ok &= np.array([i in has for i in range(n)])
    idx = sorted(np.nonzero(ok)[0], key=lambda i: (d[i], world.codes[i]))
    if limit is not None:
        idx = idx[:limit]
    return [world.codes[i] for i in idx], [float(d[i]) for i in idx]


def _random_queries(count: int, seed: int):
    rng = np.random.default_rng(seed)
    fixed = [
        (90.0, 0.0, 30_000.0, None),  # exactly at the north pole
        (-90.0, 170.0, 25_000.0, 7),  # exactly at the south pole
        (-17.6, 180.0, 20_000.0, 10),  # on the antimeridian
        (-17.6, -179.999, 40_000.0, None),  # just east of it
        (-17.6, 179.95, 8_000.0, 3),  # just west of it
        (45.21, -110.61, 10.0, 3),  # on the stack of five: ties by code, limit inside the tie
        (45.2, -110.6, 50_000.0, 500),  # more marks wanted than exist within the radius
    ]
    queries = list(fixed)
    for _ in range(count):
        clat, clon, hlat, hlon = CLUSTERS[rng.integers(len(CLUSTERS))]
        lat = float(np.clip(clat + rng.uniform(-1.3, 1.3) * hlat, -90, 90))
        lon = float(_wrap_lon(clon + rng.uniform(-1.3, 1.3) * min(hlon, 1.0)))
        radius = float(10 ** rng.uniform(2.0, 4.9))  # 100 m … 80 km
        limit = [None, 1, 5, 20, 100][rng.integers(5)]
        queries.append((lat, lon, radius, limit))
    return queries


def _random_filters(rng):
    f = {}
    if rng.random() < 0.4:
        f["status"] = list(rng.choice(MarkStatus.values, rng.integers(1, 3), replace=False))
    if rng.random() < 0.3:
        f["stability"] = str(rng.choice(Stability.values))
    if rng.random() < 0.3:
        f["frame_epsg"] = int(rng.choice(FRAMES))
    if rng.random() < 0.3:
        f["intact_visit_within_yr"] = float(rng.choice([1.0, 2.5, 5.0, 10.0]))
    if rng.random() < 0.3:
        f["accuracy_class_max_m"] = float(rng.choice([0.01, 0.02, 0.05]))
    return f


def _check_against_geographiclib(found, lat, lon):
    for item in found:
        g = GRS80_GEODESIC.Inverse(lat, lon, item.lat_deg, item.lon_deg)
        assert item.distance_m == pytest.approx(g["s12"], abs=1e-6)
        if item.azimuth_deg is not None:
            diff = (item.azimuth_deg - g["azi1"] + 180.0) % 360.0 - 180.0
            assert abs(diff) < 1e-7 or item.distance_m < 0.01


@pytest.mark.parametrize("path", PATHS)
def test_random_points_match_brute_force(world, path):
    """Many random points (poles, antimeridian and ties included), radii 100 m – 80 km, with
    and without a limit and filters: the search returns exactly the reference list."""
    rng = np.random.default_rng(7)
    for lat, lon, radius, limit in _random_queries(60, seed=11):
        filters = _random_filters(rng) if rng.random() < 0.5 else {}
        found = marks_near(lat_deg=lat, lon_deg=lon, radius_m=radius, limit=limit, as_of=AS_OF, path=path, **filters)
        codes, dists = reference(world, lat, lon, radius, limit, **filters)
        got = [m.code for m in found]
        assert got == codes, (lat, lon, radius, limit, filters)
        np.testing.assert_allclose([m.distance_m for m in found], dists, rtol=0, atol=1e-9)
        _check_against_geographiclib(found, lat, lon)


@pytest.mark.skipif(not ON_PG, reason="needs PostgreSQL + PostGIS")
def test_postgis_and_portable_paths_agree(world):
    rng = np.random.default_rng(99)
    for lat, lon, radius, limit in _random_queries(40, seed=12):
        filters = _random_filters(rng)
        a = marks_near(lat_deg=lat, lon_deg=lon, radius_m=radius, limit=limit, as_of=AS_OF, path="postgis", **filters)
        b = marks_near(lat_deg=lat, lon_deg=lon, radius_m=radius, limit=limit, as_of=AS_OF, path="portable", **filters)
        assert [(m.code, m.distance_m, m.azimuth_deg) for m in a] == [(m.code, m.distance_m, m.azimuth_deg) for m in b]


def usable_reference(world: World) -> np.ndarray:
    """The usability rule restated for the test (issue 10): a mark is usable when it is active and its
    latest visit (by date; the later row on a tie) did not find it disturbed, not found or destroyed."""
    latest: dict[int, tuple[dt.date, int, str]] = {}
    for row, (i, cond, day) in enumerate(world.visits):
        if i not in latest or (day, row) >= latest[i][:2]:
            latest[i] = (day, row, cond)
    bad = {"disturbed", "searched_not_found", "destroyed"}
    return np.array(
        [
            world.status[i] == "active" and latest.get(i, (None, None, "intact"))[2] not in bad
            for i in range(len(world.codes))
        ]
    )


@pytest.mark.parametrize("path", PATHS)
def test_usable_only_is_applied_before_the_limit(world, path):
    """limit=N with usable_only gives the N nearest usable marks (regression: the page used to take the N
    nearest active marks and then drop those whose latest visit made them not for use, so fewer than N
    showed although more usable marks lay within the radius)."""
    usable = usable_reference(world)
    n = len(world.codes)
    checked = 0
    for lat, lon, radius, limit in _random_queries(30, seed=21):
        limit = limit or 5
        found = marks_near(lat_deg=lat, lon_deg=lon, radius_m=radius, limit=limit, path=path, usable_only=True)
        d = np.asarray(GEOD.inv(np.full(n, lon), np.full(n, lat), world.lon, world.lat)[2])
        inside = sorted(np.nonzero(d <= radius)[0], key=lambda i: (d[i], world.codes[i]))
        want = [world.codes[i] for i in inside if usable[i]][:limit]
        assert [m.code for m in found] == want, (lat, lon, radius, limit)
        # the marks not for use passed over: nearer than the last one returned (all inside when short)
        last = found[-1].distance_m if len(found) == limit else radius
        assert found.left_out_not_usable == sum(1 for i in inside if not usable[i] and d[i] <= last)
        checked += found.left_out_not_usable > 0 and len(found) == limit
    assert checked >= 5  # the case that the old order got wrong occurred often enough to matter


def test_ties_are_ordered_by_code_and_coincident_marks_have_no_azimuth(world):
    found = marks_near(lat_deg=45.21, lon_deg=-110.61, radius_m=1.0)
    stack = sorted(
        c for c, la, lo in zip(world.codes, world.lat, world.lon, strict=True) if (la, lo) == (45.21, -110.61)
    )
    assert [m.code for m in found] == stack
    assert all(m.distance_m == 0.0 and m.azimuth_deg is None for m in found)
    assert [m.code for m in marks_near(lat_deg=45.21, lon_deg=-110.61, radius_m=1.0, limit=2)] == stack[:2]


def test_marks_without_a_search_location_are_never_found(world):
    found = marks_near(lat_deg=0.0, lon_deg=0.0, radius_m=1_000_000.0)
    assert "NOWHERE1" not in {m.code for m in found}


def test_results_carry_mark_instances(world):
    found = marks_near(lat_deg=45.2, lon_deg=-110.6, radius_m=5000.0, limit=3)
    assert all(isinstance(m.mark, Mark) for m in found)
    row = found[0].as_dict()
    assert set(row) >= {"code", "distance_m", "azimuth_deg", "lat_deg", "lon_deg", "status"}
    assert row["distance_m"] == round(found[0].distance_m, 3)


@pytest.mark.parametrize("path", PATHS)
def test_search_sees_writes_of_the_same_transaction(path):
    """The statement runs on Django's own connection: an uncommitted mark is found."""
    with transaction.atomic():
        Mark.objects.create(code="FRESH1", search_lat_deg=45.2, search_lon_deg=-110.6)
        found = marks_near(lat_deg=45.2001, lon_deg=-110.6, radius_m=50.0, path=path)
        assert [m.code for m in found] == ["FRESH1"]
        # 0.0001° of latitude at 45.2°N: M(φ)·Δφ ≈ 11.11 m (GeographicLib recomputation).
        g = GRS80_GEODESIC.Inverse(45.2001, -110.6, 45.2, -110.6)
        assert found[0].distance_m == pytest.approx(g["s12"], abs=1e-6)
        assert found[0].azimuth_deg == pytest.approx(180.0, abs=1e-9)


# ----------------------------------------------------------------------------- filters, hand-made


@pytest.fixture
def small_district():
    """Eight invented marks within 2 km of 45.2°N 110.6°W, each failing one filter."""

    def mk(code, north_m, **kw):
        lat = 45.2 + north_m / 111_132.0
        return Mark.objects.create(code=code, search_lat_deg=lat, search_lon_deg=-110.6, **kw)

    marks = {
        "GOOD1": mk("GOOD1", 100, stability=Stability.HIGH),
        "RETIRED1": mk("RETIRED1", 200, stability=Stability.HIGH, status=MarkStatus.RETIRED),
        "LOWSTAB1": mk("LOWSTAB1", 300, stability=Stability.LOW),
        "OLDVISIT1": mk("OLDVISIT1", 400, stability=Stability.HIGH),
        "POORVISIT1": mk("POORVISIT1", 500, stability=Stability.HIGH),
        "NAD83ONLY1": mk("NAD83ONLY1", 600, stability=Stability.HIGH),
        "COARSE1": mk("COARSE1", 700, stability=Stability.HIGH),
        "EDGE1": mk("EDGE1", 800, stability=Stability.HIGH),
    }

    def pos(code, frame, s_e, s_n, en=0.0):
        Position.objects.create(
            mark=marks[code], frame_epsg=frame, epoch_yr=2020.0, lat_deg=marks[code].search_lat_deg,
            lon_deg=-110.6, h_m=1500.0, cov_ee_m2=s_e**2, cov_en_m2=en, cov_nn_m2=s_n**2, cov_uu_m2=1e-4,
            source="invented", state=PositionState.PUBLISHED,
        )  # fmt: skip

    for code in marks:
        if code not in ("NAD83ONLY1", "COARSE1"):
            # σe = σn = 10 mm: C = 1, K = 2.450762 → r95 = 24.50762 mm (FGDC K polynomial;
            # polynomial evaluated at C = 1.0).
            pos(code, 7912, 0.010, 0.010)
    pos("NAD83ONLY1", 6319, 0.005, 0.005)
    # COARSE1: σe = 30 mm, σn ≈ 0 → C = 0, K = 1.960790 → r95 = 58.8237 mm (same table, C = 0.0). σn is
    # 1 µm, not 0: a zero variance is refused (services.position_rules; database constraint); C = 3e-5
    # moves r95 by 4e-6 mm.
    pos("COARSE1", 7912, 0.030, 1e-6)
    for code in marks:
        day = {"OLDVISIT1": dt.date(2015, 6, 1)}.get(code, dt.date(2025, 6, 1))
        cond = Finding.DAMAGED if code == "POORVISIT1" else Finding.INTACT
        Visit.objects.create(mark=marks[code], visited_on=day, finding=cond)
    # EDGE1's only good visit is exactly 5 × 365.25 days (floored: 1826) before AS_OF.
    Visit.objects.filter(mark=marks["EDGE1"]).update(visited_on=AS_OF - dt.timedelta(days=1826))
    return marks


def _codes(**kw):
    return [m.code for m in marks_near(lat_deg=45.2, lon_deg=-110.6, radius_m=2000.0, as_of=AS_OF, **kw)]


@pytest.mark.parametrize("path", PATHS)
def test_each_filter_excludes_what_it_should(small_district, path):
    everyone = ["GOOD1", "RETIRED1", "LOWSTAB1", "OLDVISIT1", "POORVISIT1", "NAD83ONLY1", "COARSE1", "EDGE1"]
    assert _codes(path=path) == everyone
    assert "RETIRED1" not in _codes(path=path, status="active")
    assert _codes(path=path, status=["retired"]) == ["RETIRED1"]
    assert "LOWSTAB1" not in _codes(path=path, stability=["high", "moderate"])
    recent = _codes(path=path, intact_visit_within_yr=5)
    assert "OLDVISIT1" not in recent and "POORVISIT1" not in recent  # 'damaged' does not count as intact
    assert "EDGE1" in recent  # the cut-off day itself counts
    assert "EDGE1" not in _codes(path=path, intact_visit_within_yr=4.999)
    assert "NAD83ONLY1" not in _codes(path=path, frame_epsg=7912)
    assert _codes(path=path, frame_epsg=6319) == ["NAD83ONLY1"]
    # r95 of 24.508 mm passes 25 mm, fails 24.5 mm; COARSE1's 58.824 mm fails both.
    assert "COARSE1" not in _codes(path=path, accuracy_class_max_m=0.025)
    assert "GOOD1" in _codes(path=path, accuracy_class_max_m=0.025)
    assert "GOOD1" not in _codes(path=path, accuracy_class_max_m=0.0245)
    assert "COARSE1" in _codes(path=path, accuracy_class_max_m=0.0589)
    assert "COARSE1" not in _codes(path=path, accuracy_class_max_m=0.0588)
    # The accuracy class is looked for in the requested frame only.
    assert "NAD83ONLY1" in _codes(path=path, accuracy_class_max_m=0.02)
    assert "NAD83ONLY1" not in _codes(path=path, accuracy_class_max_m=0.02, frame_epsg=7912)
    assert _codes(
        path=path,
        status="active",
        stability="high",
        intact_visit_within_yr=5,
        frame_epsg=7912,
        accuracy_class_max_m=0.05,
    ) == ["GOOD1", "EDGE1"]


# ----------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    "kwargs, code",
    [
        ({"lat_deg": 91.0}, "out_of_range"),
        ({"lon_deg": -180.5}, "out_of_range"),
        ({"lat_deg": float("nan")}, "out_of_range"),
        ({"lat_deg": "north"}, "invalid_number"),
        ({"radius_m": 0.0}, "out_of_range"),
        ({"radius_m": 2_000_000.0}, "out_of_range"),
        ({"limit": 0}, "out_of_range"),
        ({"status": "lost"}, "invalid_choice"),
        ({"stability": ["high", "granite"]}, "invalid_choice"),
        ({"intact_visit_within_yr": -1}, "out_of_range"),
        ({"accuracy_class_max_m": 0}, "out_of_range"),
        ({"frame_epsg": "ITRF"}, "invalid_number"),
        ({"path": "fastest"}, "invalid_choice"),
    ],
)
def test_bad_input_is_refused_with_a_code(kwargs, code):
    args = {"lat_deg": 45.2, "lon_deg": -110.6, "radius_m": 1000.0, **kwargs}
    with pytest.raises(InvalidInput) as err:
        marks_near(**args)
    assert err.value.code == code


@pytest.mark.skipif(ON_PG, reason="PostGIS is available here")
def test_postgis_path_refused_without_postgresql():
    with pytest.raises(InvalidInput) as err:
        marks_near(lat_deg=0, lon_deg=0, radius_m=10, path="postgis")
    assert err.value.code == "postgis_unavailable"


# ----------------------------------------------------------------------------- PostGIS specifics


@pytest.mark.skipif(not ON_PG, reason="needs PostgreSQL + PostGIS")
def test_knn_sphere_order_is_not_trusted_for_the_limit():
    """On the equator a metre north is longer on the PostGIS sphere (R1) than on GRS80
    (M = a(1−e²) < R1) while a metre east is shorter (N = a > R1). 70 marks about 1002 m
    east are nearer on the sphere than one mark 999 m north; the exact nearest is the
    northern one, so the first 64 KNN candidates must not be taken at face value."""
    line = GRS80_GEODESIC.Direct(0.0, 0.0, 0.0, 999.0)  # due north, 999 m
    marks = [Mark(code="NORTH", search_lat_deg=line["lat2"], search_lon_deg=line["lon2"])]
    for i in range(70):
        east = GRS80_GEODESIC.Direct(0.0, 0.0, 90.0, 1001.0 + i * 0.03)
        marks.append(Mark(code=f"EAST{i:02d}", search_lat_deg=east["lat2"], search_lon_deg=east["lon2"]))
    Mark.objects.bulk_create(marks)
    with connection.cursor() as cur:
        cur.execute(
            "SELECT code FROM registry_mark ORDER BY geog <-> ST_SetSRID(ST_MakePoint(0, 0), 4326)::geography LIMIT 64"
        )
        assert "NORTH" not in {r[0] for r in cur.fetchall()}  # the trap is real
    for path in ("postgis", "portable"):
        found = marks_near(lat_deg=0.0, lon_deg=0.0, radius_m=5000.0, limit=1, path=path)
        assert [m.code for m in found] == ["NORTH"]
        assert found[0].distance_m == pytest.approx(999.0, abs=1e-6)


@pytest.mark.skipif(not ON_PG, reason="needs PostgreSQL + PostGIS")
def test_sphere_factors_bound_postgis_spherical_distances():
    """lo·d_sphere ≤ d_GRS80 ≤ hi·d_sphere for PostGIS's use_spheroid=false distances,
    over random pairs (short and long, poles included); and the bounds are nearly reached
    (a short north–south line on the equator: M/R1 = 0.99442)."""
    from registry.geodesy.proximity import sphere_distance_factors

    lo, hi = sphere_distance_factors()
    rng = np.random.default_rng(3)
    lat1 = rng.uniform(-90, 90, 400)
    lon1 = rng.uniform(-180, 180, 400)
    az = rng.uniform(0, 360, 400)
    s = 10 ** rng.uniform(1, 6.5, 400)
    lon2, lat2, _ = GEOD.fwd(lon1, lat1, az, s)
    lat1 = np.append(lat1, [0.0, 0.0, 90.0])
    lon1 = np.append(lon1, [0.0, 0.0, 0.0])
    lat2 = np.append(lat2, [0.001, 0.0, 89.99])
    lon2 = np.append(lon2, [0.0, 0.001, 77.0])
    ratios = []
    with connection.cursor() as cur:
        for a, b, c, d in zip(lat1, lon1, lat2, lon2, strict=True):
            cur.execute(
                "SELECT ST_Distance(ST_SetSRID(ST_MakePoint(%s, %s), 4326)::geography,"
                " ST_SetSRID(ST_MakePoint(%s, %s), 4326)::geography, false)",
                [float(b), float(a), float(d), float(c)],
            )
            d_sphere = cur.fetchone()[0]
            d_ell = GRS80_GEODESIC.Inverse(a, b, c, d)["s12"]
            ratios.append(d_ell / d_sphere)
    ratios = np.array(ratios)
    assert ratios.min() >= lo and ratios.max() <= hi
    assert ratios[-3] == pytest.approx(0.99442, abs=2e-5)  # north–south on the equator


def test_marks_come_back_as_full_instances_like_the_orm(world):
    """The raw fetch behind the results gives the same field values as the ORM (aware
    datetimes included), on either database."""
    found = marks_near(lat_deg=45.2, lon_deg=-110.6, radius_m=20_000.0, limit=25)
    assert len(found) == 25
    orm = Mark.objects.in_bulk([m.mark.pk for m in found])
    for item in found:
        expected = orm[item.mark.pk]
        for f in Mark._meta.concrete_fields:
            assert getattr(item.mark, f.attname) == getattr(expected, f.attname), f.name
        assert item.mark.created_at.tzinfo is not None


def test_a_large_unlimited_result_is_fetched_in_chunks():
    """More marks than SQLite accepts parameters in one statement (32 766 by default since
    SQLite 3.32; 999 before): the id lists are sent in chunks."""
    Mark.objects.bulk_create(
        [Mark(code=f"BULK{i:05d}", search_lat_deg=45.2 + (i % 200) * 1e-4, search_lon_deg=-110.6 + (i // 200) * 1e-4)
         for i in range(2400)]
    )  # fmt: skip
    found = marks_near(lat_deg=45.21, lon_deg=-110.595, radius_m=5_000.0, accuracy_class_max_m=None)
    assert len(found) == 2400
    assert len(marks_near(lat_deg=45.21, lon_deg=-110.595, radius_m=5_000.0, accuracy_class_max_m=1.0)) == 0
