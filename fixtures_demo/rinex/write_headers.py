"""Write the demo district's RINEX observation files (invented sessions; header + a few epochs).

Run ``python -m fixtures_demo.rinex.write_headers`` to regenerate them. Each record is laid out in the
columns of the published specification of its version (label in columns 61-80):

- ``ash012_2024.24o``: RINEX 2.11 (Gurtner & Estey, IGS/RTCM 2007, Table A1), GPS only, plain text.
- ``crv031_2025.rnx.gz``: RINEX 3.05 (IGS/RTCM-SC104, 2020, Table A2), mixed GPS/GLONASS/Galileo, gzip.
- ``crv104_2026.rnx``: RINEX 4.01 (IGS/RTCM-SC104, 2023, Table A2), GPS/Galileo/BDS, plain text.
- ``crv031_2025.crx``: the first lines of a Compact RINEX (Hatanaka) file, to be refused.

Marks, receivers, antennas, people and serial numbers are invented (fixtures_demo/README.md).
Approximate positions: each mark's demo NAD83(2011) position as geocentric X, Y, Z (GRS80), moved
by a few decimetres, as a receiver's navigation solution would be.
"""

from __future__ import annotations

import gzip
from pathlib import Path

from pyproj import Transformer

HERE = Path(__file__).resolve().parent
_TO_ECEF = Transformer.from_crs("EPSG:6319", "EPSG:6317", always_xy=True)  # NAD83(2011) 3D → geocentric


def rec(content: str, label: str) -> str:
    """One header record: 60 columns of content, then the label in columns 61-80."""
    assert len(content) <= 60, content
    return f"{content:<60}{label:<20}"


def xyz(lat, lon, h, de=0.0, dn=0.0):
    x, y, z = _TO_ECEF.transform(lon, lat, h)
    return x + de, y + dn, z


def time_rec(y, mo, d, h, mi, s, system, label):
    return rec(f"{y:6d}{mo:6d}{d:6d}{h:6d}{mi:6d}{s:13.7f}     {system:<3}", label)


def v2_header() -> list[str]:
    x, y, z = xyz(45.19341101739792, -110.61224830391963, 1388.149, 0.41, -0.27)
    types = ["L1", "L2", "C1", "P2", "S1", "S2"]
    return [
        rec(f"{2.11:9.2f}{'':11}{'OBSERVATION DATA':<20}{'G (GPS)':<20}", "RINEX VERSION / TYPE"),
        rec(f"{'fieldlog 2.3':<20}{'CORVID CO SURVEY':<20}{'20240318 213015 UTC':<20}", "PGM / RUN BY / DATE"),
        rec("Invented demo session (Corvid Ridge district)", "COMMENT"),
        rec("ASH-012", "MARKER NAME"),
        rec("ASH-012", "MARKER NUMBER"),
        rec(f"{'L. Marchetti':<20}{'Corvid County Survey':<40}", "OBSERVER / AGENCY"),
        rec(f"{'RX-0451':<20}{'OFFICE GNSS RX2':<20}{'4.10':<20}", "REC # / TYPE / VERS"),
        rec(f"{'AN-0188':<20}{'OFFICE GEOD ANT1':<20}", "ANT # / TYPE"),
        rec(f"{x:14.4f}{y:14.4f}{z:14.4f}", "APPROX POSITION XYZ"),
        rec(f"{1.5230:14.4f}{0.0:14.4f}{0.0:14.4f}", "ANTENNA: DELTA H/E/N"),
        rec(f"{1:6d}{1:6d}", "WAVELENGTH FACT L1/2"),
        rec(f"{len(types):6d}" + "".join(f"    {t:>2}" for t in types), "# / TYPES OF OBSERV"),
        rec(f"{15.0:10.3f}", "INTERVAL"),
        time_rec(2024, 3, 18, 15, 4, 0.0, "GPS", "TIME OF FIRST OBS"),
        time_rec(2024, 3, 18, 17, 19, 45.0, "GPS", "TIME OF LAST OBS"),
        rec("", "END OF HEADER"),
        " 24  3 18 15  4  0.0000000  0  2G05G13",
        "  21463625.117 7  16725018.337 5  20423562.398    20423564.811    44.000          ",
        "  35.000",
        "  23112044.925 6  18009399.884 5  21980222.614    21980225.190    39.000          ",
        "  31.000",
    ]


def v3_header() -> list[str]:
    x, y, z = xyz(45.14419391136913, -110.6545310785781, 1419.9563, -0.18, 0.33)

    def sys_recs(letter, types):
        out = []
        for i in range(0, len(types), 13):
            chunk = types[i : i + 13]
            head = f"{letter:<1}  {len(types):3d}" if i == 0 else " " * 6
            out.append(rec(head + "".join(f" {t:<3}" for t in chunk), "SYS / # / OBS TYPES"))
        return out

    return [
        rec(f"{3.05:9.2f}{'':11}{'OBSERVATION DATA':<20}{'M':<20}", "RINEX VERSION / TYPE"),
        rec(f"{'fieldlog 2.3':<20}{'CORVID CO SURVEY':<20}{'20250609 221002 UTC':<20}", "PGM / RUN BY / DATE"),
        rec("CRV-031", "MARKER NAME"),
        rec("CRV-031", "MARKER NUMBER"),
        rec("GEODETIC", "MARKER TYPE"),
        rec(f"{'R. Ishikawa-Dunn':<20}{'Corvid County Survey':<40}", "OBSERVER / AGENCY"),
        rec(f"{'RX-0522':<20}{'OFFICE GNSS RX3':<20}{'5.02':<20}", "REC # / TYPE / VERS"),
        rec(f"{'AN-0203':<20}{'OFFICE GEOD ANT2':<20}", "ANT # / TYPE"),
        rec(f"{x:14.4f}{y:14.4f}{z:14.4f}", "APPROX POSITION XYZ"),
        rec(f"{1.8120:14.4f}{0.0:14.4f}{0.0:14.4f}", "ANTENNA: DELTA H/E/N"),
        *sys_recs(
            "G", ["C1C", "L1C", "D1C", "S1C", "C2W", "L2W", "D2W", "S2W", "C5Q", "L5Q", "D5Q", "S5Q", "C2L", "L2L"]
        ),
        *sys_recs("R", ["C1C", "L1C", "D1C", "S1C", "C2P", "L2P", "D2P", "S2P"]),
        *sys_recs("E", ["C1C", "L1C", "S1C", "C5Q", "L5Q", "S5Q"]),
        rec("DBHZ", "SIGNAL STRENGTH UNIT"),
        rec(f"{30.0:10.3f}", "INTERVAL"),
        time_rec(2025, 6, 9, 14, 0, 0.0, "GPS", "TIME OF FIRST OBS"),
        time_rec(2025, 6, 9, 20, 59, 30.0, "GPS", "TIME OF LAST OBS"),
        rec(" 18", "LEAP SECONDS"),
        rec("", "END OF HEADER"),
        "> 2025 06 09 14 00  0.0000000  0  2",
        "G05  21463625.117 7 112793152.33907      -512.401          44.000",
        "E11  23874411.562 7 125461200.71807       301.225          41.000",
    ]


def v4_header() -> list[str]:
    x, y, z = xyz(45.27823277339665, -110.62320465957693, 2184.7677, 0.22, 0.12)
    return [
        rec(f"{4.01:9.2f}{'':11}{'OBSERVATION DATA':<20}{'M':<20}", "RINEX VERSION / TYPE"),
        rec(f"{'fieldlog 3.0':<20}{'CORVID CO SURVEY':<20}{'20260214 190405 UTC':<20}", "PGM / RUN BY / DATE"),
        rec("Invented demo session; no real licence", "LICENSE OF USE"),
        rec("CRV-104", "MARKER NAME"),
        rec("CRV-104", "MARKER NUMBER"),
        rec("GEODETIC", "MARKER TYPE"),
        rec(f"{'E. Szabo-Whitlock':<20}{'Corvid County Survey':<40}", "OBSERVER / AGENCY"),
        rec(f"{'RX-0610':<20}{'OFFICE GNSS RX4':<20}{'1.07':<20}", "REC # / TYPE / VERS"),
        rec(f"{'AN-0241':<20}{'OFFICE GEOD ANT2':<20}", "ANT # / TYPE"),
        rec(f"{x:14.4f}{y:14.4f}{z:14.4f}", "APPROX POSITION XYZ"),
        rec(f"{1.6045:14.4f}{0.0:14.4f}{0.0:14.4f}", "ANTENNA: DELTA H/E/N"),
        rec("G    6 C1C L1C S1C C2W L2W S2W", "SYS / # / OBS TYPES"),
        rec("E    4 C1C L1C C5Q L5Q", "SYS / # / OBS TYPES"),
        rec("C    4 C2I L2I C6I L6I", "SYS / # / OBS TYPES"),
        rec(f"{1.0:10.3f}", "INTERVAL"),
        time_rec(2026, 2, 14, 16, 30, 0.0, "GPS", "TIME OF FIRST OBS"),
        time_rec(2026, 2, 14, 18, 45, 59.0, "GPS", "TIME OF LAST OBS"),
        rec(" 18", "LEAP SECONDS"),
        rec("", "END OF HEADER"),
        "> 2026 02 14 16 30  0.0000000  0  1",
        "G05  21463625.117 7 112793152.33907          44.000",
    ]


def crinex_head() -> list[str]:
    return [
        rec(f"{'3.0':<20}{'COMPACT RINEX FORMAT':<40}", "CRINEX VERS   / TYPE"),
        rec(f"{'RNX2CRX ver.4.1.0':<40}{'09-Jun-25 22:10':<20}", "CRINEX PROG / DATE"),
        *v3_header()[:4],
    ]


def main() -> None:
    text = lambda lines: ("\n".join(lines) + "\n").encode("ascii")  # noqa: E731
    (HERE / "ash012_2024.24o").write_bytes(text(v2_header()))
    (HERE / "crv031_2025.rnx.gz").write_bytes(gzip.compress(text(v3_header()), mtime=0))
    (HERE / "crv104_2026.rnx").write_bytes(text(v4_header()))
    (HERE / "crv031_2025.crx").write_bytes(text(crinex_head()))


if __name__ == "__main__":
    main()
