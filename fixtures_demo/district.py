"""The Corvid Ridge demo district: an invented scenario, generated deterministically (seeded).

Everything here is fictional: the district, the town of Ashby Crossing, the agencies, the people, the
marks and their history. Only the geodesy is real. Each mark has a "true" NAD83(2011) position (EPSG:6319,
plate-fixed; a few marks move inside the plate, one subsides, some are knocked and re-set); every
published coordinate is that truth carried into the frame and epoch of its campaign with PROJ's
time-dependent Helmert transformations (EPSG:6319 → EPSG:7912 ITRF2014 → EPSG:9989 ITRF2020; PROJ 9.5.1
through pyproj, no grids, network off), plus observation noise drawn from the position's own covariance.
So transforming any ITRF2014 position at its epoch back to NAD83(2011) lands within its stated
uncertainty of the NAD83(2011) position of the same mark.

Heights. Levelled heights are NAVD88 (EPSG:5703): the true NAD83(2011) ellipsoidal height minus an
invented "true" separation of the district's NAVD88 surface from the NAD83(2011) ellipsoid (what a
national *hybrid* model would give; the demo has no real national grid, so it invents this surface:
``N_FIT`` + ``NAVD88_OFFSET_M`` + a 3 cm ripple). Heights "via a geoid model" are what an office
would get from the *global* model EGM96 and are stored as EGM96 heights (EPSG:5773), not NAVD88:
EGM96 gives N above the WGS 84 ellipsoid as WGS 84/ITRF places it, so the NAD83(2011) ellipsoidal
height is first transformed to ITRF2014 at 2010.0 (PROJ, as the positions; about −0.63 m here),
then ``N_FIT`` is subtracted — ``N_FIT`` being a quadratic surface fitted to EGM96 over the district
(``egm96_15.gtx`` of Debian's ``proj-data`` through PROJ's ``vgridshift``; fit residual ≤ 0.05 m).
They are labelled as a global-model approximation (σ 0.40 m): a different height system from the
levelled NAVD88 heights, which is the usual reason a global model is never survey grade.

No Django import: ``registry.management.commands.load_demo`` writes the scenario to the database.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

SEED = 20111004
CENTER_LAT_DEG, CENTER_LON_DEG = 45.20, -110.60
#: The scenario's "today": visits and occupations end before this.
SCENARIO_END = dt.datetime(2026, 11, 20, tzinfo=dt.UTC)

NAD83_2011 = 6319  # NAD83(2011) geographic 3D, plate-fixed
ITRF2014 = 7912  # ITRF2014 geographic 3D, dynamic
ITRF2020 = 9989  # ITRF2020 geographic 3D, dynamic
NAVD88 = 5703  # NAVD88 height

# GRS80 (Moritz 1980): a and f; e² = f(2 − f).
GRS80_A_M = 6378137.0
GRS80_F = 1 / 298.257222101
GRS80_E2 = GRS80_F * (2 - GRS80_F)

#: N(φ, λ) ≈ c0 + c1·Δφ + c2·Δλ + c3·Δφ² + c4·Δλ² + c5·Δφ·Δλ (Δ in degrees from the centre), metres.
#: Least-squares fit to EGM96 (egm96_15.gtx, PROJ 9.5.1 vgridshift) on a 7×7 grid over
#: 45.05…45.35° N, 110.82…110.38° W; max residual 0.051 m. Recomputed once, stored here.
N_FIT_COEF = (-8.5423, -2.2607, 1.3607, -5.3530, 0.6804, -0.4221)
N_FIT_LABEL = "EGM96 global model (approximate, ±0.4 m; the demo uses a quadratic fit of its 15′ grid)"
EGM96_HEIGHT = 5773  # EGM96 height (vertical CRS)
#: Invented offset of the demo district's NAVD88 surface from the EGM96 fit (true N = fit + offset).
NAVD88_OFFSET_M = -0.45


# --- Plain records ----------------------------------------------------------------------------------


@dataclass
class DemoUser:
    username: str
    first_name: str
    last_name: str
    role: str
    password: str
    title: str


@dataclass
class DemoMark:
    code: str
    name: str
    access_directions: str
    monument: str
    monument_detail: str
    marking: str
    stability: str
    sky_view: str
    keeper: str
    status: str
    notes: str
    established: dt.datetime
    x_km: float
    y_km: float
    lat_deg: float = 0.0  # true NAD83(2011) at 2010.0
    lon_deg: float = 0.0
    h_m: float = 0.0
    ortho_m: float = 0.0
    intraplate_enu_m_yr: tuple[float, float, float] = (0.0, 0.0, 0.0)
    move_yr: float | None = None
    move_enu_m: tuple[float, float, float] = (0.0, 0.0, 0.0)
    fate: str = "good"  # good, moved, disturbed, destroyed, retired, not_found, stale
    fate_yr: float | None = None
    in_town: bool = False


@dataclass
class DemoPosition:
    key: str
    mark_code: str
    frame_epsg: int
    epoch_yr: float
    lat_deg: float
    lon_deg: float
    h_m: float
    cov_m2: tuple[float, float, float, float, float, float]  # ee, en, eu, nn, nu, uu
    source: str
    state: str
    created_at: dt.datetime
    decided_at: dt.datetime | None
    vel_m_yr: tuple[float, float, float] | None = None
    vel_sigma_m_yr: tuple[float, float, float] | None = None
    note: str = ""
    superseded_by_key: str | None = None
    superseded_at: dt.datetime | None = None


@dataclass
class DemoOccupation:
    mark_code: str
    method: str
    start_utc: dt.datetime
    end_utc: dt.datetime
    observer: str
    receiver: str = ""
    antenna: str = ""
    antenna_height_measured_m: float | None = None
    antenna_height_kind: str = "vertical"
    antenna_height_arp_m: float | None = None
    result_key: str | None = None
    notes: str = ""


@dataclass
class DemoVisit:
    mark_code: str
    visited_on: dt.date
    finding: str
    visitor: str
    notes: str


@dataclass
class DemoHeight:
    mark_code: str
    datum_epsg: int
    height_m: float
    sigma_m: float
    method: str
    geoid_model: str
    epoch_yr: float | None
    source: str
    current: bool
    created_at: dt.datetime


@dataclass
class DemoJob:
    code: str
    name: str
    client: str
    site_geojson: dict
    frame_epsg: int
    epoch_yr: float
    tol_h_mm: float
    tol_v_mm: float
    notes: str
    #: When the crew is planned to observe (the motion term runs to it); None: the screening date.
    field_date: dt.date | None = None


@dataclass
class Scenario:
    users: list[DemoUser]
    marks: list[DemoMark]
    positions: list[DemoPosition] = field(default_factory=list)
    occupations: list[DemoOccupation] = field(default_factory=list)
    visits: list[DemoVisit] = field(default_factory=list)
    heights: list[DemoHeight] = field(default_factory=list)
    jobs: list[DemoJob] = field(default_factory=list)


# --- People and agencies (all invented) ------------------------------------------------------------

#: Demo-only passwords, printed by load_demo. Never use these accounts outside a demo.
USERS = [
    DemoUser(
        "demo_viewer", "Tobin", "Farrow", "viewer", "demo-only-viewer-Q7", "field crew chief (reads the registry)"
    ),
    DemoUser("demo_technician", "Lise", "Marchetti", "technician", "demo-only-technician-K4", "survey technician"),
    DemoUser(
        "demo_manager", "Oren", "Blackwood", "manager", "demo-only-manager-W2", "control manager, geodetic surveyor"
    ),
    DemoUser(
        "demo_signatory",
        "Priya",
        "Vantongeren",
        "signatory",
        "demo-only-signatory-H9",
        "licensed surveyor (fictional licence DEMO-0412)",
    ),
    DemoUser("demo_admin", "Desmond", "Ayre", "admin", "demo-only-admin-J3", "office IT administrator"),
]
OFFICE = "Corvid County Survey Office"
PUBLIC_WORKS = "Ashby Crossing Public Works"
TRANSPORT = "Kestrel Valley Transport Authority"
IRRIGATION = "Tamsin Creek Irrigation Board"
CREW = ["L. Marchetti", "T. Farrow", "O. Blackwood", "R. Ishikawa-Dunn", "M. Halloran", "E. Szabo-Whitlock"]
RECEIVERS = [f"GNSS receiver R-{i:02d} (office unit)" for i in range(1, 7)]
ANTENNAS = [f"geodetic antenna A-{i:02d}, no radome" for i in range(1, 7)]
#: Slant-measure geometry of the office's antennas (invented values, same form as a maker's table):
#: radius of the slant-measure point and the vertical offset from it to the ARP (negative: ARP below).
SLANT_RADIUS_M, SLANT_TO_ARP_M = 0.0953, -0.0483

STREETS = [
    "Mill St",
    "Ferry Rd",
    "Third Ave",
    "Granary Ln",
    "Orchard St",
    "Depot St",
    "Willow Ave",
    "Kestrel Way",
    "Courthouse Sq",
    "Pioneer Rd",
    "Elm St",
    "River St",
    "Tannery Row",
    "Schoolhouse Ln",
]
PLACES = [
    "Gable Butte",
    "Lone Pine Draw",
    "Tamsin Creek",
    "Harrow Flat",
    "Coyote Bench",
    "Blackrail Gulch",
    "Sentinel Knob",
    "Corvid Ridge",
    "Bitterbrush Saddle",
    "Juniper Rim",
    "Ferrous Spring",
    "Old Quarry",
    "Millrace Flats",
    "Kettle Hill",
    "Wrenfield Gap",
    "Highway 9",
]

MONUMENT_DETAILS = {
    "disk_rock": ("bronze disk cemented in a drill hole in a granite outcrop", "high"),
    "disk_concrete": ("bronze disk in the top of a 30 cm concrete post set 1.2 m deep", "moderate"),
    "deep_rod": ("stainless rod driven 9 m to refusal, in a sleeve with a logo cap", "high"),
    "pillar": ("concrete pillar 1.4 m high with a forced-centring plate", "high"),
    "bolt_structure": ("brass bolt set in a bridge abutment", "moderate"),
    "pin_concrete": ("steel pin in a concrete curb", "low"),
    "iron_pipe": ("iron pipe 0.8 m long with a plastic cap", "low"),
    "nail": ("survey nail with washer in asphalt", "low"),
}


# --- Geometry helpers -------------------------------------------------------------------------------


@lru_cache(maxsize=1)
def _aeqd():
    import pyproj

    return pyproj.Proj(proj="aeqd", lat_0=CENTER_LAT_DEG, lon_0=CENTER_LON_DEG, ellps="GRS80")


@lru_cache(maxsize=4)
def _transformer(from_epsg: int, to_epsg: int):
    import pyproj

    pyproj.network.set_network_enabled(False)
    return pyproj.Transformer.from_crs(from_epsg, to_epsg, always_xy=True, only_best=True)


def xy_km_to_latlon(x_km: float, y_km: float) -> tuple[float, float]:
    """Azimuthal equidistant plane (km east/north of the centre, GRS80) → latitude, longitude."""
    lon, lat = _aeqd()(x_km * 1000.0, y_km * 1000.0, inverse=True)
    return float(lat), float(lon)


def radii_m(lat_deg: float) -> tuple[float, float]:
    """Meridian (M) and prime-vertical (N) radii of curvature of GRS80 at ``lat_deg``."""
    s2 = math.sin(math.radians(lat_deg)) ** 2
    w = math.sqrt(1 - GRS80_E2 * s2)
    return GRS80_A_M * (1 - GRS80_E2) / w**3, GRS80_A_M / w


def offset_enu(
    lat_deg: float, lon_deg: float, h_m: float, e_m: float, n_m: float, u_m: float
) -> tuple[float, float, float]:
    """Move a point by small local east/north/up offsets (metres; < 1 m, so first order is exact to µm)."""
    m, n = radii_m(lat_deg)
    lat = lat_deg + math.degrees(n_m / (m + h_m))
    lon = lon_deg + math.degrees(e_m / ((n + h_m) * math.cos(math.radians(lat_deg))))
    return lat, lon, h_m + u_m


def enu_difference(p1: tuple[float, float, float], p2: tuple[float, float, float]) -> tuple[float, float, float]:
    """Small local east/north/up difference p2 − p1 in metres."""
    m, n = radii_m(p1[0])
    de = math.radians(p2[1] - p1[1]) * (n + p1[2]) * math.cos(math.radians(p1[0]))
    dn = math.radians(p2[0] - p1[0]) * (m + p1[2])
    return de, dn, p2[2] - p1[2]


def n_fit_m(lat_deg: float, lon_deg: float) -> float:
    """The demo's geoid-model value N (quadratic fit to EGM96; see module docstring)."""
    dy, dx = lat_deg - CENTER_LAT_DEG, lon_deg - CENTER_LON_DEG
    c = N_FIT_COEF
    return c[0] + c[1] * dy + c[2] * dx + c[3] * dy * dy + c[4] * dx * dx + c[5] * dx * dy


def terrain_ortho_m(x_km: float, y_km: float) -> float:
    """Invented terrain: a valley floor at about 1390 m rising to Corvid Ridge (about 2250 m) in the north."""
    ridge = 820.0 * math.exp(-(((y_km - 9.5) / 2.8) ** 2)) * (0.75 + 0.25 * math.cos(x_km / 4.0))
    return 1388.0 + 9.0 * abs(x_km) + 6.0 * max(y_km, 0.0) + ridge


def yr_to_datetime(yr: float) -> dt.datetime:
    """Decimal year → UTC datetime (year length counted in days of that year)."""
    year = int(math.floor(yr))
    start = dt.datetime(year, 1, 1, tzinfo=dt.UTC)
    days = (dt.datetime(year + 1, 1, 1, tzinfo=dt.UTC) - start).total_seconds()
    return start + dt.timedelta(seconds=(yr - year) * days)


def datetime_to_yr(when: dt.datetime) -> float:
    year = when.year
    start = dt.datetime(year, 1, 1, tzinfo=dt.UTC)
    days = (dt.datetime(year + 1, 1, 1, tzinfo=dt.UTC) - start).total_seconds()
    return year + (when - start).total_seconds() / days


def _compass(bearing_deg: float) -> str:
    names = ["north", "north-east", "east", "south-east", "south", "south-west", "west", "north-west"]
    return names[int(((bearing_deg % 360) + 22.5) // 45) % 8]


# --- The scenario -----------------------------------------------------------------------------------


class _Builder:
    def __init__(self):
        self.rng = np.random.default_rng(SEED)
        self.scenario = Scenario(users=list(USERS), marks=[])
        self.by_code: dict[str, DemoMark] = {}
        self._chains: dict[tuple[str, int], list[DemoPosition]] = {}
        self._n = 0

    # layout ----------------------------------------------------------------------------------------
    def _place(self, n: int, sampler, min_sep_km: float, taken: list[tuple[float, float]]):
        out = []
        while len(out) < n:
            x, y = sampler()
            if all((x - a) ** 2 + (y - b) ** 2 >= min_sep_km**2 for a, b in taken + out):
                out.append((x, y))
        taken.extend(out)
        return out

    def layout(self):
        rng = self.rng
        taken: list[tuple[float, float]] = []

        def town():
            r = min(abs(rng.normal(0, 1.3)), 2.9)
            a = rng.uniform(0, 2 * math.pi)
            return r * math.cos(a), r * math.sin(a)

        def highway():
            x = rng.uniform(-14.5, 7.0)
            return x, 0.3 * x - 0.8 + rng.normal(0, 0.25)

        def rural():
            while True:
                x, y = rng.uniform(-15, 15, size=2)
                if x * x + y * y > 3.2**2 and not (x > 6.5 and y > 5.5):  # the north-east stays sparse
                    return float(x), float(y)

        town_xy = self._place(64, town, 0.15, taken)
        highway_xy = self._place(14, highway, 0.9, taken)
        rural_xy = self._place(103, rural, 0.9, taken)
        ne_xy = [(9.0, 6.2), (13.9, 13.2), (12.6, 9.6)]  # the sparse north-east corner (CRV-118…120)
        taken.extend(ne_xy)

        groups = [("ASH", town_xy, True), ("CRV", highway_xy + rural_xy + ne_xy, False)]
        for prefix, xys, in_town in groups:
            for i, (x, y) in enumerate(xys, start=1):
                self._make_mark(f"{prefix}-{i:03d}", x, y, in_town, highway=(prefix == "CRV" and i <= len(highway_xy)))

    def _make_mark(self, code: str, x: float, y: float, in_town: bool, highway: bool):
        rng = self.rng
        n = int(code[-3:])
        if in_town:
            mtype = str(
                rng.choice(
                    ["nail", "bolt_structure", "pin_concrete", "disk_concrete", "deep_rod"],
                    p=[0.22, 0.22, 0.2, 0.26, 0.1],
                )
            )
            # Each town mark at its own corner: (n mod k, 1 + (n // k) mod (k - 1)) is a distinct (street,
            # offset) pair for n < k·(k − 1) = 182, and the offset is never 0, so cross ≠ street.
            k = len(STREETS)
            street, cross = STREETS[n % k], STREETS[(n + 1 + (n // k) % (k - 1)) % k]
            name = f"{street} & {cross}"
            keeper = PUBLIC_WORKS if n % 3 == 0 else OFFICE
            sky = str(rng.choice(["clear", "partial", "obstructed"], p=[0.45, 0.38, 0.17]))
            established_yr = float(rng.uniform(1998, 2011.4)) if n <= 48 else float(rng.uniform(2019.1, 2021.2))
        else:
            mtype = str(
                rng.choice(
                    ["disk_rock", "disk_concrete", "deep_rod", "iron_pipe", "pillar"], p=[0.3, 0.32, 0.16, 0.14, 0.08]
                )
            )
            if highway:
                mtype = str(rng.choice(["bolt_structure", "disk_concrete"]))
            place = "Highway 9" if highway else PLACES[n % (len(PLACES) - 1)]
            name = f"{place} {n}" if not highway else f"Highway 9 milepost {28 + x * 0.62:.1f}"
            keeper = TRANSPORT if highway else (IRRIGATION if n % 11 == 0 else OFFICE)
            sky = str(rng.choice(["clear", "partial", "obstructed"], p=[0.8, 0.16, 0.04]))
            established_yr = float(rng.uniform(1985, 2011.4)) if n <= 100 else float(rng.uniform(2014.2, 2017.8))
        monument_detail, stability = MONUMENT_DETAILS[mtype]
        established = yr_to_datetime(established_yr)
        dist = math.hypot(x, y)
        bearing = math.degrees(math.atan2(x, y)) % 360
        landmark = ["the cattle guard", "the culvert headwall", "the power pole", "the fence corner", "the gate post"][
            n % 5
        ]
        if in_town:
            access_directions = (
                f"From the courthouse steps in Ashby Crossing go {dist:.1f} km {_compass(bearing)} to {name}. "
                f"The mark is {3 + n % 9} m {_compass(bearing + 90)} of the {['curb return', 'hydrant', 'light pole'][n % 3]}."
            )
        else:
            access_directions = (
                f"From the courthouse in Ashby Crossing go {dist:.1f} km {_compass(bearing)} "
                f"by {'Highway 9' if highway else 'county road ' + str(100 + n % 40)}; "
                f"the mark is {8 + n % 30} m {_compass(bearing + 135)} of {landmark}. Park off the road."
            )
        lat, lon = xy_km_to_latlon(x, y)
        ortho = terrain_ortho_m(x, y) + float(rng.normal(0, 4.0))
        n_true = n_fit_m(lat, lon) + NAVD88_OFFSET_M + 0.03 * math.sin(x / 5.0) * math.cos(y / 7.0)
        mark = DemoMark(
            code=code,
            name=name[:120],
            access_directions=access_directions,
            monument=mtype,
            monument_detail=monument_detail,
            marking=f"{code} {established.year} CORVID CO SURVEY" if mtype not in ("nail", "iron_pipe") else "",
            stability=stability,
            sky_view=sky,
            keeper=keeper,
            status="active",
            notes="",
            established=established,
            x_km=x,
            y_km=y,
            lat_deg=lat,
            lon_deg=lon,
            h_m=round(ortho + n_true, 4),
            ortho_m=ortho,
            in_town=in_town,
        )
        self.scenario.marks.append(mark)
        self.by_code[code] = mark

    # fates -----------------------------------------------------------------------------------------
    def fates(self):
        rng = self.rng
        old = [m for m in self.scenario.marks if m.established.year <= 2011]
        order = [old[i] for i in rng.permutation(len(old))]
        picks = iter(order)

        def take(k, predicate=lambda m: True):
            chosen = []
            while len(chosen) < k:
                m = next(picks)
                if predicate(m):
                    chosen.append(m)
                else:
                    leftovers.append(m)
            return chosen

        leftovers: list[DemoMark] = []
        for m in take(8):
            m.fate, m.move_yr = "moved", float(rng.uniform(2015.5, 2022.5))
            az = rng.uniform(0, 2 * math.pi)
            d = rng.uniform(0.03, 0.08)
            m.move_enu_m = (d * math.sin(az), d * math.cos(az), -float(rng.uniform(0.01, 0.04)))
            cause = [
                "a grader clipped the post",
                "frost heave tilted the post",
                "a culvert was replaced beside it",
                "a vehicle struck it",
                "the curb was rebuilt around it",
            ][int(rng.integers(5))]
            m.notes = (
                f"Disturbed in {int(m.move_yr)} ({cause}); re-observed and re-published. Older coordinates superseded."
            )
        for m in take(6):
            m.fate, m.fate_yr, m.status = "destroyed", float(rng.uniform(2016.0, 2025.8)), "destroyed"
            m.notes = f"Destroyed in {int(m.fate_yr)} ({'road widening' if m.in_town else 'quarry expansion'}); kept for history."
        for m in take(2):
            m.fate, m.fate_yr, m.status = "retired", float(rng.uniform(2017.0, 2022.0)), "retired"
            m.notes = f"Retired in {int(m.fate_yr)}: on private land, access withdrawn by the owner."
        for m in take(5):
            m.fate, m.fate_yr = "disturbed", float(rng.uniform(2024.0, 2026.6))
        for m in take(4):
            m.fate, m.fate_yr = "not_found", float(rng.uniform(2023.0, 2026.5))
        for m in take(10, lambda m: not m.in_town):
            m.fate, m.fate_yr = "stale", float(rng.uniform(2013.0, 2015.5))  # last recovered then
        # The north-east corner: one good mark near the corridor's start, the others unusable.
        ne_destroyed, ne_disturbed = self.by_code["CRV-119"], self.by_code["CRV-120"]
        ne_destroyed.fate, ne_destroyed.fate_yr, ne_destroyed.status = "destroyed", 2021.3, "destroyed"
        ne_destroyed.notes = "Destroyed in 2021 (quarry expansion); kept for history."
        ne_disturbed.fate, ne_disturbed.fate_yr = "disturbed", 2025.4
        # Monitoring marks with velocities: stable monuments away from town, still good.
        pool = [
            m for m in list(picks) + leftovers if m.fate == "good" and m.monument in ("pillar", "deep_rod", "disk_rock")
        ]
        pool.sort(key=lambda m: m.code)
        self.monitoring = pool[:8]
        for i, m in enumerate(self.monitoring):
            ve, vn = (float(v) for v in rng.normal(0, 0.0008, size=2))
            vu = -0.0045 if i == 0 else float(rng.normal(0, 0.0006))
            m.intraplate_enu_m_yr = (ve, vn, vu)
            if i == 0:
                m.notes = "Subsides about 4.5 mm/yr (Tamsin Creek well field); use with its velocity."
            else:
                m.notes = "Monitoring mark: repeat static campaigns give its velocity."

    def alive(self, m: DemoMark, yr: float) -> bool:
        """Can the mark be occupied at ``yr``? (Exists, not destroyed/retired/disturbed/lost/stale by then.)"""
        if m.established > yr_to_datetime(yr):
            return False
        if m.fate in ("destroyed", "retired", "disturbed", "not_found") and yr >= m.fate_yr:
            return False
        if m.fate == "stale" and yr >= m.fate_yr + 0.05:
            return False
        if m.fate == "moved" and m.move_yr <= yr < m.move_yr + 0.4:
            return False
        return True

    # positions -------------------------------------------------------------------------------------
    def true_nad83(self, m: DemoMark, yr: float) -> tuple[float, float, float]:
        ve, vn, vu = m.intraplate_enu_m_yr
        e, n, u = ve * (yr - 2010.0), vn * (yr - 2010.0), vu * (yr - 2010.0)
        if m.move_yr is not None and yr >= m.move_yr:
            e, n, u = e + m.move_enu_m[0], n + m.move_enu_m[1], u + m.move_enu_m[2]
        return offset_enu(m.lat_deg, m.lon_deg, m.h_m, e, n, u)

    def true_in(self, m: DemoMark, frame: int, yr: float) -> tuple[float, float, float]:
        lat, lon, h = self.true_nad83(m, yr)
        if frame == NAD83_2011:
            return lat, lon, h
        lon, lat, h, _ = _transformer(NAD83_2011, ITRF2014).transform(lon, lat, h, yr)
        if frame == ITRF2020:
            lon, lat, h, _ = _transformer(ITRF2014, ITRF2020).transform(lon, lat, h, yr)
        return float(lat), float(lon), float(h)

    def covariance(self, sigma_h_mm: tuple[float, float], sigma_u_mm: tuple[float, float]):
        rng = self.rng
        se = rng.uniform(*sigma_h_mm) / 1000.0
        sn = se * rng.uniform(0.85, 1.2)
        su = rng.uniform(*sigma_u_mm) / 1000.0
        r_en, r_eu, r_nu = rng.uniform(-0.25, 0.25), rng.uniform(-0.12, 0.12), rng.uniform(-0.12, 0.12)
        cov = np.array(
            [
                [se * se, r_en * se * sn, r_eu * se * su],
                [r_en * se * sn, sn * sn, r_nu * sn * su],
                [r_eu * se * su, r_nu * sn * su, su * su],
            ]
        )
        return cov

    def observe(self, m: DemoMark, frame: int, epoch: float, cov) -> tuple[float, float, float]:
        """The true position in ``frame`` at ``epoch`` plus noise drawn from ``cov`` (m², ENU)."""
        lat, lon, h = self.true_in(m, frame, epoch)
        e, n, u = self.rng.multivariate_normal(np.zeros(3), cov)
        lat, lon, h = offset_enu(lat, lon, h, float(e), float(n), float(u))
        return round(lat, 11), round(lon, 11), round(h, 4)

    def position(
        self,
        m: DemoMark,
        frame: int,
        epoch: float,
        cov,
        source: str,
        decided: dt.datetime | None,
        created: dt.datetime,
        state: str = "published",
        note: str = "",
        chain: bool = True,
        velocity=None,
    ):
        self._n += 1
        lat, lon, h = self.observe(m, frame, epoch, cov)
        c = tuple(float(f"{v:.6g}") for v in (cov[0, 0], cov[0, 1], cov[0, 2], cov[1, 1], cov[1, 2], cov[2, 2]))
        p = DemoPosition(
            key=f"P{self._n:05d}",
            mark_code=m.code,
            frame_epsg=frame,
            epoch_yr=round(epoch, 4),
            lat_deg=lat,
            lon_deg=lon,
            h_m=h,
            cov_m2=c,
            source=source,
            state=state,
            created_at=created,
            decided_at=decided,
            note=note,
        )
        if velocity is not None:
            p.vel_m_yr, p.vel_sigma_m_yr = velocity
        self.scenario.positions.append(p)
        if chain:
            self._chains.setdefault((m.code, frame), []).append(p)
        return p

    def transformed(self, p: DemoPosition, cov, source: str, epoch_label: float) -> DemoPosition:
        """A NAD83(2011) position computed from the same observation as the ITRF2014 position ``p``.

        PROJ carries ``p`` to NAD83(2011) at its own epoch; the mark has no motion inside the plate, so the
        coordinates hold at ``epoch_label`` too. Same noise as ``p``; ``cov`` adds the transformation's.
        """
        lon, lat, h, _ = _transformer(ITRF2014, NAD83_2011).transform(p.lon_deg, p.lat_deg, p.h_m, p.epoch_yr)
        self._n += 1
        c = tuple(float(f"{v:.6g}") for v in (cov[0, 0], cov[0, 1], cov[0, 2], cov[1, 1], cov[1, 2], cov[2, 2]))
        q = DemoPosition(
            key=f"P{self._n:05d}",
            mark_code=p.mark_code,
            frame_epsg=NAD83_2011,
            epoch_yr=epoch_label,
            lat_deg=round(float(lat), 11),
            lon_deg=round(float(lon), 11),
            h_m=round(float(h), 4),
            cov_m2=c,
            source=source,
            state="published",
            created_at=p.created_at,
            decided_at=p.decided_at,
        )
        self.scenario.positions.append(q)
        self._chains.setdefault((p.mark_code, NAD83_2011), []).append(q)
        return q

    def itrf_velocity(self, m: DemoMark, frame: int, yr: float):
        """ENU velocity of the mark in ``frame`` (plate motion from PROJ plus its own), m/yr, rounded to 0.1 mm/yr."""
        p1, p2 = self.true_in(m, frame, yr - 0.5), self.true_in(m, frame, yr + 0.5)
        v = enu_difference(p1, p2)
        return tuple(round(c, 4) for c in v), (0.0003, 0.0003, 0.0008)

    def occupation(self, m: DemoMark, epoch: float, hours: float, method: str, result: DemoPosition | None, notes=""):
        rng = self.rng
        start = yr_to_datetime(epoch) - dt.timedelta(hours=hours / 2)
        start = start.replace(minute=(start.minute // 5) * 5, second=0, microsecond=0)
        end = start + dt.timedelta(hours=hours)
        k = int(rng.integers(len(RECEIVERS)))
        occ = DemoOccupation(
            mark_code=m.code,
            method=method,
            start_utc=start,
            end_utc=end,
            observer=CREW[int(rng.integers(len(CREW)))],
            result_key=result.key if result else None,
            notes=notes,
        )
        if method in ("static_gnss", "rtk", "network_rtk"):
            occ.receiver, occ.antenna = RECEIVERS[k], ANTENNAS[k]
            if m.monument == "pillar":
                occ.antenna_height_measured_m = occ.antenna_height_arp_m = 0.1000
                occ.notes = (occ.notes + " Forced-centring adapter, 0.100 m to the ARP.").strip()
            elif method == "network_rtk":
                occ.antenna_height_measured_m = occ.antenna_height_arp_m = 2.0000
            elif rng.random() < 0.3:
                s = round(float(rng.uniform(1.35, 1.75)), 4)
                occ.antenna_height_kind = "slant"
                occ.antenna_height_measured_m = s
                # h_ARP = √(s² − r²) + Δh (brief §3, slant to vertical; Δh negative: ARP below the slant point)
                occ.antenna_height_arp_m = round(math.sqrt(s * s - SLANT_RADIUS_M**2) + SLANT_TO_ARP_M, 4)
            else:
                occ.antenna_height_measured_m = occ.antenna_height_arp_m = round(float(rng.uniform(1.25, 1.80)), 4)
        self.scenario.occupations.append(occ)
        return occ

    def campaigns(self):
        rng = self.rng
        marks = self.scenario.marks
        static_h, static_u = (2.5, 5.5), (6.0, 13.0)

        def session(window):
            return float(rng.uniform(*window))

        # 1. NAD83(2011) epoch 2010.00: the county adjustment of 2012 (sessions observed in 2011).
        decided = dt.datetime(2012, 3, 15, 16, 0, tzinfo=dt.UTC)
        for m in marks:
            if m.established.year > 2011:
                continue
            obs = session((2011.60, 2011.85))
            cov = self.covariance((4.0, 9.0), (9.0, 18.0))
            p = self.position(
                m,
                NAD83_2011,
                2010.0,
                cov,
                "Corvid County GNSS adjustment 2012 (NAD83(2011) epoch 2010.00)",
                decided,
                yr_to_datetime(obs + 0.1),
            )
            self.occupation(m, obs, float(rng.choice([6.0, 8.0])), "static_gnss", p)

        # 2. ITRF2014 campaigns. Each mark's ITRF2014 positions form a chain; the latest is published.
        plan = [
            (
                (2013.45, 2013.65),
                dt.datetime(2017, 5, 10, 15, 0, tzinfo=dt.UTC),
                0.45,
                "2013 static campaign, reprocessed in ITRF2014 (2017)",
            ),
            ((2018.55, 2018.75), dt.datetime(2018, 11, 20, 15, 0, tzinfo=dt.UTC), 0.7, "2018 district static campaign"),
            ((2023.60, 2023.80), dt.datetime(2023, 12, 5, 15, 0, tzinfo=dt.UTC), 0.55, "2023 district static campaign"),
        ]
        for window, decided, share, source in plan:
            for m in marks:
                obs = session(window)
                if not self.alive(m, obs):
                    continue
                if m.fate == "moved" and obs < m.move_yr < datetime_to_yr(decided) + 0.7:
                    continue  # a pre-move solution is never published after (or near) the re-observation
                if m not in self.monitoring and rng.random() > share:
                    continue
                velocity = None
                if m in self.monitoring and window[0] > 2023:
                    velocity = self.itrf_velocity(m, ITRF2014, obs)
                cov = self.covariance(static_h, static_u)
                p = self.position(m, ITRF2014, obs, cov, source, decided, yr_to_datetime(obs + 0.08), velocity=velocity)
                self.occupation(m, obs, float(rng.choice([4.0, 6.0, 8.0])), "static_gnss", p)

        # 3. Town densification 2021: new town marks by network RTK (larger sigmas), in both frames.
        decided = dt.datetime(2021, 10, 4, 15, 0, tzinfo=dt.UTC)
        for m in marks:
            if not (m.in_town and m.established.year >= 2019):
                continue
            obs = session((2021.30, 2021.45))
            cov = self.covariance((9.0, 14.0), (18.0, 28.0))
            p = self.position(
                m,
                ITRF2014,
                obs,
                cov,
                "2021 town densification (network RTK, 2 × 3 min)",
                decided,
                yr_to_datetime(obs + 0.05),
            )
            cov83 = cov + np.diag([0.003**2, 0.003**2, 0.005**2])  # + the frame transformation's uncertainty
            self.transformed(p, cov83, "2021 town densification, transformed to NAD83(2011) epoch 2010.00", 2010.0)
            self.occupation(m, obs, 0.05, "network_rtk", p, notes="Two 3-minute sessions, re-initialised between.")

        # 4. Marks that moved: re-observed after the disturbance, new positions supersede the old ones.
        for m in marks:
            if m.fate != "moved":
                continue
            obs = m.move_yr + float(rng.uniform(0.42, 0.7))
            decided = yr_to_datetime(obs + 0.12)
            cov = self.covariance(static_h, static_u)
            p = self.position(
                m,
                ITRF2014,
                obs,
                cov,
                f"re-observation after disturbance ({int(obs)})",
                decided,
                yr_to_datetime(obs + 0.05),
            )
            self.transformed(
                p,
                cov + np.diag([0.002**2, 0.002**2, 0.004**2]),
                f"re-observation after disturbance ({int(obs)}), transformed to NAD83(2011)",
                round(obs, 2),
            )
            self.occupation(
                m, obs, 6.0, "static_gnss", p, notes="Re-observation after the disturbance reported at the last visit."
            )

        # 5. Monitoring marks: NAD83(2011) re-adjustment with velocities (2024).
        decided = dt.datetime(2024, 2, 20, 15, 0, tzinfo=dt.UTC)
        for m in self.monitoring:
            cov = self.covariance((2.0, 3.5), (5.0, 8.0))
            vel = (tuple(round(v, 4) for v in m.intraplate_enu_m_yr), (0.0003, 0.0003, 0.0008))
            self.position(
                m,
                NAD83_2011,
                2010.0,
                cov,
                "monitoring re-adjustment 2024, NAD83(2011) epoch 2010.00 with velocities",
                decided,
                decided - dt.timedelta(days=20),
                velocity=vel,
            )

        # 6. ITRF2020 campaign 2025 (a subset of good, clear-sky marks).
        decided = dt.datetime(2026, 2, 10, 15, 0, tzinfo=dt.UTC)
        chosen = [m for m in marks if m.fate == "good" and m.sky_view == "clear"]
        chosen = [chosen[i] for i in sorted(rng.choice(len(chosen), size=26, replace=False))]
        for m in chosen + [x for x in self.monitoring if x not in chosen]:
            obs = session((2025.62, 2025.78))
            velocity = self.itrf_velocity(m, ITRF2020, obs) if m in self.monitoring else None
            cov = self.covariance((2.0, 4.5), (5.0, 10.0))
            p = self.position(
                m,
                ITRF2020,
                obs,
                cov,
                "2025 ITRF2020 static campaign",
                decided,
                yr_to_datetime(obs + 0.06),
                velocity=velocity,
            )
            self.occupation(m, obs, 8.0, "static_gnss", p)

        # 7. Waiting for the manager: proposed positions from 2026 sessions, and one rejected blunder.
        good = [m for m in marks if m.fate == "good" and m.established.year <= 2011 and m not in self.monitoring]
        pending = [good[i] for i in sorted(rng.choice(len(good), size=6, replace=False))]
        for m in pending[:5]:
            obs = session((2026.55, 2026.75))
            cov = self.covariance(static_h, static_u)
            p = self.position(
                m,
                ITRF2014,
                obs,
                cov,
                "2026 check sessions (technician)",
                None,
                yr_to_datetime(obs + 0.03),
                state="proposed",
                chain=False,
                note="Awaiting review.",
            )
            self.occupation(m, obs, 4.0, "static_gnss", p)
        m = pending[5]
        obs = 2026.41
        cov = self.covariance(static_h, static_u)
        p = self.position(
            m,
            ITRF2014,
            obs,
            cov,
            "2026 check session (technician)",
            yr_to_datetime(2026.46),
            yr_to_datetime(2026.42),
            state="rejected",
            chain=False,
            note="Rejected: antenna height recorded to the wrong point (about 0.28 m too high).",
        )
        p.h_m = round(p.h_m + 0.283, 4)
        self.occupation(m, obs, 2.0, "static_gnss", p, notes="Antenna height blunder, see the rejected position.")

    def link_chains(self):
        for chain in self._chains.values():
            chain.sort(key=lambda p: (p.decided_at, p.key))
            for older, newer in zip(chain, chain[1:], strict=False):
                older.state = "superseded"
                older.superseded_by_key = newer.key
                older.superseded_at = newer.decided_at

    # visits and heights ----------------------------------------------------------------------------
    def visits(self):
        rng = self.rng
        by_mark: dict[str, list[DemoVisit]] = {}
        for occ in self.scenario.occupations:
            if occ.method == "levelling":
                continue
            m = self.by_code[occ.mark_code]
            cond = "damaged" if rng.random() < 0.06 else "intact"
            note = (
                "Recovered for the campaign session."
                if cond == "intact"
                else "Recovered; logo cap cracked, mark itself sound."
            )
            by_mark.setdefault(m.code, []).append(DemoVisit(m.code, occ.start_utc.date(), cond, occ.observer, note))
        for m in self.scenario.marks:
            yr = max(datetime_to_yr(m.established), 2011.2) + float(rng.uniform(0.3, 2.5))
            while yr < 2026.85:
                if self.alive(m, yr):
                    cond = "damaged" if rng.random() < 0.07 else "intact"
                    note = (
                        "Inspection: mark and witness post in place."
                        if cond == "intact"
                        else "Inspection: witness post missing; mark sound."
                    )
                    by_mark.setdefault(m.code, []).append(
                        DemoVisit(m.code, yr_to_datetime(yr).date(), cond, CREW[int(rng.integers(len(CREW)))], note)
                    )
                yr += float(rng.uniform(2.0, 4.5))
            crew = CREW[int(rng.integers(len(CREW)))]
            if m.fate == "moved":
                by_mark.setdefault(m.code, []).append(
                    DemoVisit(
                        m.code,
                        yr_to_datetime(m.move_yr + 0.05).date(),
                        "disturbed",
                        crew,
                        m.notes.split(";")[0] + "; mark still set but out of position. Do not use until re-observed.",
                    )
                )
            elif m.fate in ("destroyed", "disturbed", "not_found"):
                text = {
                    "destroyed": "Monument gone; the site is now under new pavement/fill.",
                    "disturbed": "Post leaning about 5°; mark may have moved. Do not use until re-observed.",
                    "not_found": "Searched 30 min with a metal detector where the access directions lead; not found.",
                }[m.fate]
                finding = "searched_not_found" if m.fate == "not_found" else m.fate
                by_mark.setdefault(m.code, []).append(
                    DemoVisit(m.code, yr_to_datetime(m.fate_yr).date(), finding, crew, text)
                )
        for code in sorted(by_mark):
            visits = sorted(by_mark[code], key=lambda v: v.visited_on)
            self.scenario.visits.extend(v for v in visits if v.visited_on <= SCENARIO_END.date())

    def heights(self):
        rng = self.rng
        loop = [
            m
            for m in self.scenario.marks
            if (m.in_town and m.established.year <= 2011) or m.name.startswith("Highway 9")
        ]
        for m in loop:
            obs = float(rng.uniform(2014.45, 2014.7))
            sigma = round(float(rng.uniform(0.002, 0.006)), 4)
            ortho = self._levelled(m, obs, sigma)
            created = yr_to_datetime(2014.9)
            moved_later = m.fate == "moved" and m.move_yr > obs
            self.scenario.heights.append(
                DemoHeight(
                    m.code,
                    NAVD88,
                    ortho,
                    sigma,
                    "levelled",
                    "",
                    None,
                    "Ashby Crossing level loop 2014 (second order)",
                    not moved_later,
                    created,
                )
            )
            self.occupation(m, obs, 0.5, "levelling", None, notes="Level loop 2014, section closed within 4 mm √km.")
            if moved_later:
                obs2 = m.move_yr + 0.5
                self.scenario.heights.append(
                    DemoHeight(
                        m.code,
                        NAVD88,
                        self._levelled(m, obs2, sigma),
                        sigma,
                        "levelled",
                        "",
                        None,
                        f"re-levelled after disturbance ({int(obs2)})",
                        True,
                        yr_to_datetime(obs2 + 0.1),
                    )
                )
                self.occupation(
                    m, obs2, 0.5, "levelling", None, notes="Re-levelled from two benchmarks after the disturbance."
                )
        rural = [m for m in self.scenario.marks if not m.in_town and m not in loop and m.fate == "good"]
        for m in rural[:: max(1, len(rural) // 8)][:8]:
            # EGM96 applies to heights in ITRF (WGS 84): transform the NAD83(2011) height first.
            lat, lon, h = self.true_in(m, ITRF2014, 2010.0)
            sigma = 0.40  # the global model's error dominates (module docstring)
            self.scenario.heights.append(
                DemoHeight(
                    m.code,
                    EGM96_HEIGHT,
                    round(h - n_fit_m(lat, lon), 3),
                    sigma,
                    "geoid",
                    N_FIT_LABEL,
                    2010.0,
                    "ITRF2014 ellipsoidal height at 2010.0 (from NAD83(2011)) minus EGM96 N (approximate)",
                    True,
                    dt.datetime(2012, 4, 2, tzinfo=dt.UTC),
                )
            )

    def _levelled(self, m: DemoMark, yr: float, sigma: float) -> float:
        lat, lon, h = self.true_nad83(m, yr)
        n_true = (
            n_fit_m(m.lat_deg, m.lon_deg) + NAVD88_OFFSET_M + 0.03 * math.sin(m.x_km / 5.0) * math.cos(m.y_km / 7.0)
        )
        return round(h - n_true + float(self.rng.normal(0, sigma)), 4)

    # jobs ------------------------------------------------------------------------------------------
    def jobs(self):
        def ring(points_km):
            coords = []
            for x, y in points_km + [points_km[0]]:
                lat, lon = xy_km_to_latlon(x, y)
                coords.append([round(lon, 7), round(lat, 7)])
            return {"type": "Polygon", "coordinates": [coords]}

        lat, lon = xy_km_to_latlon(0.6, -0.4)
        corridor = []
        x0, y0, x1, y1, half = 8.0, 5.2, 14.6, 11.8, 0.16
        ux, uy = (x1 - x0), (y1 - y0)
        norm = math.hypot(ux, uy)
        px, py = -uy / norm * half, ux / norm * half
        corridor = [(x0 + px, y0 + py), (x1 + px, y1 + py), (x1 - px, y1 - py), (x0 - px, y0 - py)]
        # Tolerances chosen so that the three jobs show the three usual outcomes under the default error
        # model (8 mm + 1 ppm read as 1σ per axis, so even a zero baseline gives ≥ 2.4477 × 8.25 ≈ 20.2 mm
        # horizontal at 95 %), with the base and rover set-ups and each base's motion relative to the site from
        # the 2010.0 deliverable epoch to the planned field date (about 17 years at 0.5 mm/yr per axis for marks
        # without a velocity: 8.5 mm; that is why the two NAD83(2011) jobs allow 36–38 mm horizontally): the point has several bases that each qualify; the subdivision is covered
        # by a pair but by no single base; the corridor cannot be covered at its far end. The outcomes are
        # pinned in tests/test_load_demo.py through the screening service.
        # The subdivision is a band along the line from ASH-024 (about 0.9 km east, 1.1 km north of the centre)
        # to CRV-065 (about 4.9 km east, 3.0 km north): at 30 mm ASH-024 reaches about 3.9 km and CRV-065, with its larger own σ, about
        # 1.9 km, so the two ends each need their own base.
        self.scenario.jobs = [
            DemoJob(
                "J-2026-014",
                "Ashby Crossing water tower: foundation stake-out",
                PUBLIC_WORKS,
                {"type": "Point", "coordinates": [round(lon, 7), round(lat, 7)]},
                NAD83_2011,
                2010.0,
                36.0,
                55.0,
                "Point site in the town core; many marks nearby, several obstructed or disturbed. "
                "Several bases meet the stake-out tolerance; use the best one and check in on two others. "
                "The monitored subsider ASH-004 has moved about 8 cm down since the 2010.0 coordinates.",
                dt.date(2026, 12, 14),
            ),
            DemoJob(
                "J-2026-021",
                "Millrace Flats subdivision: boundary and topography",
                "Millrace Flats Development Co.",
                ring([(2.25, 1.40), (5.20, 2.80), (4.90, 3.45), (1.95, 2.05)]),
                NAD83_2011,
                2010.0,
                38.0,
                55.0,
                "Long polygon from the town's north-east edge out onto the flats. No single base reaches both "
                "ends within tolerance: survey the west part from a town mark and the east part from a mark "
                "on the flats.",
                dt.date(2027, 1, 18),
            ),
            DemoJob(
                "J-2026-027",
                "Quarry Road realignment, 0+000 to 9+400",
                TRANSPORT,
                ring(corridor),
                ITRF2014,
                2026.85,
                30.0,
                50.0,
                "Corridor into the sparse north-east corner: the first kilometres can be run from a mark at "
                "0+000, but the far end is several km from any usable mark, more than a 30 mm tolerance "
                "allows from a single base. Plan new control (static GNSS) or a network RTK service there.",
                dt.date(2026, 11, 9),
            ),
        ]


def build_scenario() -> Scenario:
    """The whole demo district, the same every time (seed ``SEED``)."""
    b = _Builder()
    b.layout()
    b.fates()
    b.campaigns()
    b.link_chains()
    b.heights()
    b.visits()
    b.jobs()
    return b.scenario
