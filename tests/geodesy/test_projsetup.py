"""PROJ set-up at app start and the PROJ/geoid system checks (registry.E010–E012, W010–W012)."""

from __future__ import annotations

import pyproj
import pytest

from registry.checks import check_proj
from registry.geodesy.projsetup import configure_proj, find_grid, proj_status, search_dirs


def ids(messages):
    return sorted(m.id for m in messages)


def test_app_start_turned_the_network_off_and_proj_db_is_found():
    status = proj_status()
    assert status["network_enabled"] is False
    assert status["proj_db"] is not None
    assert status["proj_version"] == "9.5.1"  # pinned in requirements.txt through pyproj 3.7.2


def test_configure_proj_appends_existing_folders_once(tmp_path):
    before = search_dirs()
    after = configure_proj(grid_dirs=[str(tmp_path), str(tmp_path), str(tmp_path / "missing")])
    assert after.count(str(tmp_path.resolve())) == 1
    assert str(tmp_path / "missing") not in after
    assert after[: len(before)] == before  # pyproj's own data folder stays first (its proj.db wins)
    (tmp_path / "office.gtx").write_bytes(b"")
    assert find_grid("office.gtx") == str((tmp_path / "office.gtx").resolve())
    assert find_grid("not_there.gtx") is None


def test_default_settings_pass_the_checks():
    assert ids(check_proj()) == []


def test_network_on_is_reported_and_off_again_after():
    pyproj.network.set_network_enabled(True)
    try:
        assert "registry.W010" in ids(check_proj())
    finally:
        pyproj.network.set_network_enabled(False)


def test_missing_configured_geoid_is_an_error(settings, tmp_path):
    settings.REGISTRY = {**settings.REGISTRY, "GEOID_DIR": str(tmp_path / "nope"), "GEOID_MODEL": "office.tif"}
    got = ids(check_proj())
    assert "registry.E011" in got and "registry.W011" in got


@pytest.mark.skipif(find_grid("egm96_15.gtx") is None, reason="needs the Debian EGM96 grid")
def test_no_grid_at_all_is_a_warning(settings, tmp_path, monkeypatch):
    import registry.geodesy.projsetup as ps

    settings.REGISTRY = {**settings.REGISTRY, "GEOID_DIR": str(tmp_path), "GEOID_MODEL": ""}
    monkeypatch.setattr(ps, "DEBIAN_PROJ_DIR", str(tmp_path))  # simulate a machine without proj-data
    assert "registry.W012" in ids(check_proj())
