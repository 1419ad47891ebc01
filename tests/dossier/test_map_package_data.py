"""The map shapes are package data: a wheel carries them, and the dossier and the dashboard
read them from the installed package (no checkout, no network).

Expectations: the shapes are the vendored Natural Earth 1:110m countries (Natural Earth
Admin 0, public domain; see src/exposhift/data/maps/README.md), whose ids are ISO 3166-1
alpha-3 codes, e.g. NLD for the Netherlands (ISO 3166-1).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

from exposhift import mapdata

ROOT = Path(__file__).resolve().parents[2]
MAPS = ("exposhift/data/maps/countries-110m.geojson", "exposhift/data/maps/country_points.json")


def test_shapes_and_points_load_from_the_package():
    shapes = mapdata.country_shapes()
    ids = {f["id"] for f in shapes["features"]}
    assert {"NLD", "SWE", "JPN", "BRA"} <= ids  # ISO 3166-1 alpha-3 codes
    points = mapdata.country_points()
    lon, lat, name = points["NLD"]
    assert 3 < lon < 8 and 50 < lat < 54 and "Netherlands" in name  # the Netherlands' extent


def _wheel(tmp_path: Path) -> Path:
    src = tmp_path / "src-copy"
    src.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, src / name)
    shutil.copytree(ROOT / "src", src / "src", ignore=shutil.ignore_patterns("*.egg-info"))
    out = tmp_path / "dist"
    out.mkdir()
    code = (
        "import sys; from setuptools import build_meta; "
        f"print(build_meta.build_wheel({str(out)!r}))"
    )
    subprocess.run([sys.executable, "-c", code], cwd=src, check=True, capture_output=True)
    (wheel,) = out.glob("exposhift-*.whl")
    return wheel


def test_a_wheel_carries_the_shapes_and_the_dossier_map_reads_them(tmp_path):
    wheel = _wheel(tmp_path)
    with zipfile.ZipFile(wheel) as z:
        names = set(z.namelist())
        assert set(MAPS) <= names
        target = tmp_path / "installed"
        z.extractall(target)
    # the unpacked wheel first on the path, run from a directory without a checkout
    probe = (
        "import exposhift, sys; from pathlib import Path; "
        f"assert Path(exposhift.__file__).is_relative_to({str(target)!r}), exposhift.__file__; "
        "from exposhift.dossier.figures import country_shapes; "
        "s = country_shapes(); assert s is not None; print(len(s['features']))"
    )
    done = subprocess.run(
        [sys.executable, "-c", probe],
        cwd=tmp_path,
        env={"PYTHONPATH": str(target), "PATH": "/usr/bin:/bin"},
        capture_output=True,
        text=True,
    )
    assert done.returncode == 0, done.stderr
    assert int(done.stdout.strip()) > 150  # Natural Earth 1:110m has 177 countries
