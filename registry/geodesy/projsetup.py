"""PROJ set-up for the registry: network off, grid folders on PROJ's search path, grid lookup.

Pure module (no Django): the app calls :func:`configure_proj` once at start-up
(``RegistryConfig.ready``) with the folders from settings; system checks use :func:`proj_status`.

PROJ documentation, "Resource files" and "Environment variables" (``PROJ_NETWORK``), and pyproj's
``pyproj.datadir.append_data_dir`` / ``pyproj.network.set_network_enabled``.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["DEBIAN_PROJ_DIR", "configure_proj", "find_grid", "proj_status", "search_dirs"]

#: Where Debian's ``proj-data`` package installs grids (e.g. egm96_15.gtx).
DEBIAN_PROJ_DIR = "/usr/share/proj"


def search_dirs() -> list[str]:
    """PROJ's current data search path (pyproj's own data folder first)."""
    import pyproj.datadir

    raw = pyproj.datadir.get_data_dir()
    return [p for p in raw.split(os.pathsep) if p]


def configure_proj(*, grid_dirs=()) -> list[str]:
    """Turn PROJ network access off and append existing ``grid_dirs`` to PROJ's search path.

    Idempotent; folders that do not exist are skipped (a system check reports them).
    Returns the resulting search path.
    """
    import pyproj.datadir
    import pyproj.network

    pyproj.network.set_network_enabled(False)
    current = search_dirs()
    for d in grid_dirs:
        if not d:
            continue
        path = str(Path(d).resolve())
        if os.path.isdir(path) and path not in current:
            pyproj.datadir.append_data_dir(path)
            current.append(path)
    return search_dirs()


def find_grid(name: str, *, dirs=()) -> str | None:
    """Absolute path of grid file ``name`` in ``dirs``, PROJ's search path or Debian's folder; else None.

    An absolute ``name`` is returned if it exists.
    """
    if not name:
        return None
    if os.path.isabs(name):
        return name if os.path.isfile(name) else None
    for d in [*dirs, *search_dirs(), DEBIAN_PROJ_DIR]:
        if d and os.path.isfile(os.path.join(d, name)):
            return str(Path(d, name).resolve())
    return None


def proj_status() -> dict:
    """Facts for the system checks: search path, whether proj.db is found, network state, versions."""
    import pyproj
    import pyproj.network

    dirs = search_dirs()
    return {
        "search_dirs": dirs,
        "proj_db": next((os.path.join(d, "proj.db") for d in dirs if os.path.isfile(os.path.join(d, "proj.db"))), None),
        "network_enabled": bool(pyproj.network.is_network_enabled()),
        "proj_version": pyproj.proj_version_str,
        "pyproj_version": pyproj.__version__,
    }
