"""The built wheel carries the example sites, so an installed hiplan has its default site."""
import subprocess
import sys
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_wheel_contains_sites_and_default_site_loads(tmp_path):
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation",
                    "-q", "-w", str(tmp_path), str(ROOT)], check=True, capture_output=True)
    (wheel,) = tmp_path.glob("hiplan-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    assert "planner/_sites/hollowmere.toml" in names
    assert "planner/_sites/saltbush-ridge.toml" in names
    # The brief's page layout (Jinja2 templates) is package data.
    for template in ("brief.html.j2", "brief.md.j2", "brief.css"):
        assert f"planner/templates/{template}" in names
    # Unpack as an installed layout and load the default site from a folder without sites/.
    site_packages = tmp_path / "installed"
    zipfile.ZipFile(wheel).extractall(site_packages)
    probe = ("import planner.site as s; site = s.load_site(None); "
             "print(s.bundled_sites_dir()); print(site.name)")
    proc = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          cwd=tmp_path, env={"PYTHONPATH": str(site_packages), "PATH": "/usr/bin:/bin"},
                          check=True)
    folder, name = proc.stdout.strip().splitlines()
    assert folder.startswith(str(site_packages)) and name.startswith("Hollowmere")
    # The installed package renders a brief from its own templates.
    brief_probe = ("import planner.brief as b; print(b.TEMPLATES); print(b.brief_markdown("
                   "{'schema': 'hiplan.survey/1', 'site': {'name': 'Probe'}, 'blocks': []})"
                   ".splitlines()[0])")
    proc = subprocess.run([sys.executable, "-c", brief_probe], capture_output=True, text=True,
                          cwd=tmp_path, env={"PYTHONPATH": str(site_packages), "PATH": "/usr/bin:/bin"},
                          check=True)
    folder, first_line = proc.stdout.strip().splitlines()
    assert folder.startswith(str(site_packages)) and first_line == "# Operator brief: Probe"


def test_astroplan_is_only_a_benchmark_dependency():
    """hiplan never imports astroplan; only the survey benchmark does (its baseline)."""
    import tomllib
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert not any(d.startswith("astroplan") for d in meta["dependencies"])
    assert any(d.startswith("astroplan") for d in meta["optional-dependencies"]["bench"])
    uses = [p for p in (ROOT / "planner").rglob("*.py") if "import astroplan" in p.read_text()
            or "from astroplan" in p.read_text()]
    assert uses == []
