"""The package users install: the app is an extra, the wheel carries what the app reads (consistency)."""

from __future__ import annotations

import shutil
import subprocess
import tomllib
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))


@pytest.mark.parametrize("extra", ["app", "pdf"])
def test_the_checkouts_dev_group_carries_each_extra_with_the_same_bounds(extra):
    wanted = set(PYPROJECT["project"]["optional-dependencies"][extra])
    assert wanted and wanted <= set(PYPROJECT["dependency-groups"]["dev"])
    base = " ".join(PYPROJECT["project"]["dependencies"])
    # The command line and API need none of it (the PDF plan is the only use of fpdf2).
    assert not any(req.split(">")[0].split("=")[0] in base for req in wanted)


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> zipfile.ZipFile:
    uv = shutil.which("uv")
    if uv is None:
        pytest.skip("uv builds the wheel")
    out = tmp_path_factory.mktemp("dist")
    subprocess.run([uv, "build", "--wheel", "-o", str(out), "-q"], cwd=ROOT, check=True, timeout=300)
    return zipfile.ZipFile(next(out.glob("*.whl")))


def test_wheel_carries_the_app_and_what_it_reads(wheel):
    names = set(wheel.namelist())
    assert {"estimator_app/run.py", "estimator_app/serve.py", "estimator_app/shell.py", "estimator/py.typed"} <= names
    assert {"estimator_app/docs/VALIDATION.md", "estimator_app/.streamlit/config.toml"} <= names
    demo = {p.name for p in (ROOT / "demo_cases").glob("*.toml")}
    assert demo <= {Path(n).name for n in names if n.startswith("estimator_app/demo_cases/")}
    assert "estimator/data/real_gas_table.npz" in names


@pytest.mark.parametrize(("package", "extra"), [("streamlit", "app"), ("fpdf2", "pdf")])
def test_an_extras_package_is_required_only_by_that_extra(wheel, package, extra):
    meta = next(n for n in wheel.namelist() if n.endswith(".dist-info/METADATA"))
    lines = [ln for ln in wheel.read(meta).decode().splitlines() if ln.startswith("Requires-Dist")]
    required = [ln for ln in lines if f" {package}" in ln]
    assert required and all(f"extra == '{extra}'" in ln for ln in required)


def test_project_urls_name_the_documentation_and_the_changelog(wheel):
    # Issue 18: [project.urls] reach the package index as Project-URL lines. The project has no public
    # address yet, so they are placeholders under the reserved .invalid domain (never a stranger's site).
    urls = PYPROJECT["project"]["urls"]
    assert {"Homepage", "Documentation", "Changelog", "Source", "Issues"} <= set(urls)
    assert all(u.startswith("https://") for u in urls.values())
    assert len({u.split("/")[2] for u in urls.values()}) == 1  # one address for all
    meta = next(n for n in wheel.namelist() if n.endswith(".dist-info/METADATA"))
    lines = [ln for ln in wheel.read(meta).decode().splitlines() if ln.startswith("Project-URL")]
    assert any(ln.startswith("Project-URL: Documentation, ") for ln in lines), lines


def test_readme_images_are_files_of_the_repository():
    # The README shows docs/*.png by relative path: right in a checkout and on the source host. A package
    # index renders the README without these files; the absolute address replaces the path at release
    # (DEVELOPERS.md, "Releasing").
    import re

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    images = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", readme)
    assert images and all((ROOT / p).is_file() for p in images if not p.startswith("https://"))
