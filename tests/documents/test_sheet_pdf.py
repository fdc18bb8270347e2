"""The station description sheet, read back from the PDF (pypdf) and checked against independent sources.

Check values are computed here, in the test, with libraries outside the project (pyproj for ECEF and UTM
coordinates and the projection's scale factor and convergence; numpy for the covariance's eigenvalues)
and the published formulas (FGDC-STD-007.2-1998 K polynomial, 1.9600·σ; the radius √(ρν) and
R/(R+h) of NOAA Manual NOS NGS 5 (Stem 1989)). The QR code
is decoded from a 150 dpi rendering (pdftoppm) with zxing-cpp, an independent decoder.
"""

from __future__ import annotations

import io
import math
import re
import shutil
import subprocess

import numpy as np
import pytest
from pypdf import PdfReader

from registry.models import DocumentState, Finding, MarkStatus, Visit
from registry.services.documents import document_build_sheet, verify_url
from tests.documents.conftest import POSITION

pytestmark = pytest.mark.django_db


def _pages_text(content: bytes) -> list[str]:
    return [p.extract_text() or "" for p in PdfReader(io.BytesIO(content)).pages]


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def _dms(angle_deg: float, pos: str, neg: str) -> str:
    """Independent DMS formatting to 0.00001″ (integer arithmetic on 10⁻⁵ arc-seconds)."""
    units = round(abs(angle_deg) * 3600 * 100000)
    d, rem = divmod(units, 3600 * 100000)
    m, s = divmod(rem, 60 * 100000)
    return f"{d}°{m:02d}′{s // 100000:02d}.{s % 100000:05d}″ {pos if angle_deg >= 0 else neg}"


def _k_fgdc(c: float) -> float:
    # FGDC-STD-007.2-1998, horizontal 95 % circle factor (secondary transcription)
    return 1.960790 + 0.004071 * c + 0.114276 * c**2 + 0.371625 * c**3


@pytest.fixture
def sheet(mark, technician):
    return document_build_sheet(actor=technician, mark_code=mark.code)


def test_printed_coordinates_equal_independent_computation(sheet):
    import pyproj

    text = _flat(" ".join(_pages_text(bytes(sheet.content))))
    lat, lon, h = POSITION["lat_deg"], POSITION["lon_deg"], POSITION["h_m"]
    # latitude / longitude: DMS to 0.00001″ and degrees to 9 places (DEVELOPERS.md "Display")
    assert _dms(lat, "N", "S") in text
    assert _dms(lon, "E", "W") in text
    assert f"{lat:.9f}°" in text and f"{lon:.9f}°" in text
    assert f"{h:.3f} m" in text
    # ECEF from pyproj (+proj=cart on GRS80, the NAD83(2011) ellipsoid), 4 decimals
    cart = pyproj.Transformer.from_pipeline("+proj=cart +ellps=GRS80")
    x, y, z = cart.transform(lon, lat, h)
    for v in (x, y, z):
        assert f"{v:.4f} m" in text
    # UTM zone 12N on NAD83(2011) (EPSG:6341) from pyproj, 3 decimals; scale factor 8 decimals
    utm = pyproj.Transformer.from_crs(6318, 6341, always_xy=True)
    e, n = utm.transform(lon, lat)
    assert f"{e:.3f} m" in text and f"{n:.3f} m" in text
    factors = pyproj.Proj(6341).get_factors(lon, lat)
    assert f"{factors.meridional_scale:.8f}" in text
    # convergence to 0.01″: PROJ's meridian convergence, DMS
    gamma = factors.meridian_convergence
    sec = round(abs(gamma) * 3600 * 100)
    d, rem = divmod(sec, 360000)
    m, s = divmod(rem, 6000)
    assert f"{'+' if gamma >= 0 else '−'}{d}°{m:02d}′{s // 100:02d}.{s % 100:02d}″" in text
    # elevation factor R/(R+h), R = √(ρν) on GRS80 (a = 6378137, f = 1/298.257222101), 8 decimals
    a, f = 6378137.0, 1 / 298.257222101
    e2 = f * (2 - f)
    phi = math.radians(lat)
    w = math.sqrt(1 - e2 * math.sin(phi) ** 2)
    rho, nu = a * (1 - e2) / w**3, a / w
    r = math.sqrt(rho * nu)
    ef = r / (r + h)
    assert f"{ef:.8f}" in text
    assert f"{factors.meridional_scale * ef:.8f}" in text


def test_network_accuracy_and_statement_wording(sheet):
    text = _flat(" ".join(_pages_text(bytes(sheet.content))))
    cov = np.array([[POSITION["cov_ee_m2"], POSITION["cov_en_m2"]], [POSITION["cov_en_m2"], POSITION["cov_nn_m2"]]])
    lo, hi = np.sqrt(np.linalg.eigvalsh(cov))
    h95 = _k_fgdc(lo / hi) * hi
    v95 = 1.96 * math.sqrt(POSITION["cov_uu_m2"])  # FGDC Part 2 vertical: 1.9600·σ
    assert f"Horizontal network accuracy {h95:.3f} m ({h95 * 1000:.1f} mm) at the 95% confidence level" in text
    assert f"Ellipsoid height network accuracy {v95:.3f} m ({v95 * 1000:.1f} mm) at the 95% confidence level" in text
    # classes (FGDC-STD-007.2-1998 table, bounds inclusive; from memory, unconfirmed): 21.7 mm → 5-Centimeter,
    # 24.3 mm → 5-Centimeter
    assert 0.02 < h95 <= 0.05 and 0.02 < v95 <= 0.05
    assert text.count("FGDC-STD-007.2-1998 class 5-Centimeter") == 2
    assert "95 % confidence" in text  # the cautions explain what 95 % means


def test_page_n_of_m_on_every_page_and_heading(sheet):
    pages = _pages_text(bytes(sheet.content))
    assert len(pages) == sheet.page_count >= 1
    for i, text in enumerate(pages, start=1):
        flat = _flat(text)
        assert f"page {i} of {len(pages)}" in flat
        assert f"Document {sheet.code} · revision {sheet.revision}" in flat
        assert "Station description sheet" in flat
    last = _flat(pages[sheet.signature_page])
    assert "Signature of the licensed surveyor" in last
    assert "Cautions" in last


def test_cautions_and_history_tables(sheet):
    text = _flat(" ".join(_pages_text(bytes(sheet.content))))
    for phrase in (
        "Verify a position on site before using it",
        "may have been disturbed since it was last visited",
        "Accuracies are stated at 95 % confidence",
        "licensed professional practice",
        "Recovery history",
        "Occupation history",
        "T. Farrow",
        "1.379 m to ARP",
        "CR-101",  # the nearby mark in the vicinity diagram
    ):
        assert phrase in text, phrase


@pytest.mark.skipif(shutil.which("pdftoppm") is None, reason="needs pdftoppm (poppler-utils)")
def test_qr_code_opens_the_verification_page(sheet, tmp_path):
    import zxingcpp
    from PIL import Image

    pdf = tmp_path / "sheet.pdf"
    pdf.write_bytes(bytes(sheet.content))
    subprocess.run(["pdftoppm", "-r", "150", "-f", "1", "-l", "1", "-png", str(pdf), str(tmp_path / "p")], check=True)
    (png,) = tmp_path.glob("p*.png")
    found = zxingcpp.read_barcodes(Image.open(png))
    texts = [b.text for b in found if b.format == zxingcpp.BarcodeFormat.QRCode]
    assert texts == [verify_url(sheet.code)]
    assert texts[0].endswith(f"/verify/{sheet.code}/")


def test_page_size_setting(mark, technician, settings):
    settings.REGISTRY = {**settings.REGISTRY, "PAGE_SIZE": "Letter"}
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    box = PdfReader(io.BytesIO(bytes(doc.content))).pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (612, 792)  # 8.5 × 11 in at 72 pt/in
    doc = document_build_sheet(actor=technician, mark_code=mark.code, page_size="A4")
    box = PdfReader(io.BytesIO(bytes(doc.content))).pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (595, 842)  # 210 × 297 mm (ISO 216)


@pytest.mark.parametrize("status", [MarkStatus.DESTROYED, MarkStatus.RETIRED, MarkStatus.SUSPECT])
def test_unusable_mark_says_so_first_and_prints_no_coordinates(mark, technician, status):
    mark.status = status
    mark.suspect_reason = "the visit of 2026-01-05 found it disturbed" if status == MarkStatus.SUSPECT else ""
    mark.save()
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    first_page = _pages_text(bytes(doc.content))[0]
    body_lines = [ln for ln in first_page.splitlines() if ln.strip()]
    # the body's first line is the warning (the page heading is drawn after the body, so it comes later)
    word = {MarkStatus.DESTROYED: "DESTROYED", MarkStatus.RETIRED: "RETIRED", MarkStatus.SUSPECT: "SUSPECT"}[status]
    assert body_lines[0].startswith("MARK " + word)
    text = _flat(" ".join(_pages_text(bytes(doc.content))))
    assert _dms(POSITION["lat_deg"], "N", "S") not in text
    assert "Published positions" not in text and "network accuracy" not in text


def test_disturbed_visit_withholds_coordinates_until_a_new_position(mark, technician, manager):
    import datetime as dt

    Visit.objects.create(mark=mark, visited_on=dt.date(2026, 1, 5), finding=Finding.DISTURBED)
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    text = _flat(" ".join(_pages_text(bytes(doc.content))))
    assert "MARK DISTURBED ON 2026-01-05, AWAITING RE-POSITIONING" in text
    assert _dms(POSITION["lat_deg"], "N", "S") not in text
    assert doc.options == {"withheld": True}
    assert doc.state == DocumentState.DRAFT


def test_photos_and_logo_are_drawn(mark, technician, settings, tmp_path):
    from django.core.files.uploadedfile import SimpleUploadedFile
    from PIL import Image

    from registry.services.fieldwork import attachment_add

    settings.MEDIA_ROOT = str(tmp_path / "media")
    for i in range(3):  # three photos: the sheet shows the two newest
        buf = io.BytesIO()
        Image.new("RGB", (64, 48), (120, 140, 90 + 40 * i)).save(buf, format="PNG")
        attachment_add(
            actor=technician,
            mark_code=mark.code,
            file=SimpleUploadedFile(f"photo{i}.png", buf.getvalue(), content_type="image/png"),
            kind="photo",
            caption=f"invented photo {i}",
        )
    logo = tmp_path / "logo.png"
    Image.new("RGB", (40, 20), (0, 0, 0)).save(logo)
    settings.REGISTRY = {**settings.REGISTRY, "OFFICE_LOGO": str(logo)}
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    reader = PdfReader(io.BytesIO(bytes(doc.content)))
    images = [img for page in reader.pages for img in page.images]
    assert len(images) == 2 + doc.page_count  # two photos, and the logo in every page's heading
    text = _flat(" ".join(_pages_text(bytes(doc.content))))
    assert "invented photo 2" in text and "invented photo 1" in text and "invented photo 0" not in text
