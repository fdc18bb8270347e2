"""The mark page states each position's network accuracy, the same figure the API gives.

Check values (hand formulas, FGDC-STD-007.2-1998 Part 2 as transcribed in registry/geodesy/accuracy.py):
KV-002's position has σe = 4 mm, σn = 3 mm, σu = 9 mm, no correlation (tests/web/scenario.py).
Horizontal: C = σmin/σmax = 0.75, K = 1.960790 + 0.004071·C + 0.114276·C² + 0.371625·C³ = 2.184903,
r95 = K·4 mm = 8.740 mm; ellipsoid height: 1.9600·9 mm = 17.640 mm.
"""

from __future__ import annotations

import re

import pytest


@pytest.mark.django_db
def test_mark_page_shows_the_network_accuracy_the_api_gives(kestrel, signed_in, viewer):
    client = signed_in(viewer)
    page = client.get("/marks/KV-002/").content.decode()
    assert "Network accuracy 95 %" in page
    cells = re.findall(r'<td class="num">(\d+\.\d) / (\d+\.\d)</td>', page)
    assert ("8.7", "17.6") in cells
    api = client.get("/api/marks/KV-002/positions/").json()
    rows = api["results"] if isinstance(api, dict) and "results" in api else api
    published = [r for r in rows if r["state"] == "published"]
    assert len(published) == 1
    assert published[0]["network_accuracy_h95_mm"] == pytest.approx(8.74, abs=0.005)
    assert published[0]["network_accuracy_u95_mm"] == pytest.approx(17.64, abs=0.005)
    shown = (f"{published[0]['network_accuracy_h95_mm']:.1f}", f"{published[0]['network_accuracy_u95_mm']:.1f}")
    assert shown in cells  # the page and the API print one figure
