"""The wheel carries everything an installed figfolio needs (issue 2: `pip install .` works).

The default theme lives at the top of the repository; setup.py copies it into the package.
A wheel without it would install fine and then fail at the first build, so check the wheel.
"""
from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_wheel_contains_theme_and_scaffold(tmp_path: Path):
    done = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w",
                           str(tmp_path), str(ROOT)], capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    wheel = next(tmp_path.glob("figfolio-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    theme = {p.relative_to(ROOT).as_posix() for p in (ROOT / "site_template").rglob("*")
             if p.is_file()}
    assert theme, "the repository has a default theme"
    missing = {t for t in theme if f"figfolio/{t}" not in names}
    assert not missing, f"theme files missing from the wheel: {sorted(missing)[:5]}"
    assert "figfolio/scaffold/recipe.toml" in names and "figfolio/scaffold/figure.py" in names
    entry = [n for n in names if n.endswith("entry_points.txt")]
    text = zipfile.ZipFile(wheel).read(entry[0]).decode()
    assert "figfolio = figfolio.cli:main" in text  # the console script (PEP 621 [project.scripts])
