"""A built wheel carries the page files and the sample, and `wallscreen demo` runs from it."""

from __future__ import annotations

import os
import subprocess
import sys
import venv
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

pytestmark = pytest.mark.wheel


@pytest.fixture(scope="module")
def wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", str(ROOT), "-w", str(out)],
        check=True,
        capture_output=True,
    )
    (found,) = out.glob("wallscreen-*.whl")
    return found


def test_wheel_contains_templates_scripts_and_sample(wheel: Path):
    names = set(zipfile.ZipFile(wheel).namelist())
    for needed in (
        "screening/outputs/webmap.js",
        "screening/outputs/webmap.css",
        "screening/outputs/sheet.html.j2",
        "screening/sample_inventory/register_2025.xlsx",
        "screening/sample_inventory/register_2026.xlsx",
        "screening/sample_inventory/mapping.toml",
    ):
        assert needed in names, needed


def test_demo_runs_from_the_installed_wheel(wheel: Path, tmp_path: Path):
    # a fresh venv that sees the already-installed dependencies, with the wheel installed into it
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(system_site_packages=True, with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    subprocess.run(
        [sys.executable, "-m", "pip", "--python", str(python), "install", "-q", "--no-deps", str(wheel)],
        check=True,
        capture_output=True,
    )
    work = tmp_path / "elsewhere"  # not the repository: nothing may be read from the checkout
    work.mkdir()
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    where = subprocess.run(
        [str(python), "-c", "import screening; print(screening.__file__)"],
        cwd=work, env=env, capture_output=True, text=True, check=True,
    )  # fmt: skip
    assert str(env_dir) in where.stdout, where.stdout
    done = subprocess.run(
        [str(env_dir / "bin" / "wallscreen"), "demo", "--out", str(work / "out")],
        cwd=work, env=env, capture_output=True, text=True,
    )  # fmt: skip
    assert done.returncode == 0, done.stdout + done.stderr
    for name in ("map.html", "report.xlsx", "results.csv", "walls.gpkg"):
        assert (work / "out" / name).stat().st_size > 0, name
    assert any((work / "out" / "sheets").glob("*.html"))
