"""heatsight installs as one import package from a wheel, with its demo data inside.

The wheel is built from this checkout and unpacked into a private folder; the demo then runs
from an unrelated notebook-like folder holding its own forward.py, inverse.py and data_io.py.
"""

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    proc = subprocess.run([sys.executable, "-m", "pip", "wheel", "-q", "--no-deps",
                           "--no-build-isolation", "-w", str(out), str(ROOT)],
                          capture_output=True, text=True, timeout=300)
    if proc.returncode != 0:
        pytest.fail(f"building the wheel failed:\n{proc.stderr[-2000:]}")
    return next(out.glob("heatsight-*.whl"))


def test_wheel_holds_one_import_package_and_the_demo(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    tops = {n.split("/")[0] for n in names if not n.split("/")[0].endswith(".dist-info")}
    assert tops == {"heatsight"}
    for data in ("platen.toml", "layout.csv", "readings.csv", "truth.json"):
        assert f"heatsight/demo_data/{data}" in names
    assert "heatsight/forward/bessel_zero_tables.npz" in names     # the shipped root tables


def test_installed_wheel_runs_demo_beside_clashing_modules(wheel, tmp_path):
    site = tmp_path / "site"
    proc = subprocess.run([sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target",
                           str(site), str(wheel)], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    notebook = tmp_path / "notebook"
    notebook.mkdir()
    for clash in ("forward.py", "inverse.py", "data_io.py"):
        (notebook / clash).write_text("raise ImportError('a user module, not heatsight')\n")
    env = {"PYTHONPATH": str(site), "PATH": "/usr/bin:/bin", "MPLBACKEND": "Agg"}
    code = ("import heatsight, sys; from importlib.resources import files; "
            "assert heatsight.__file__.startswith(sys.argv[1]), heatsight.__file__; "
            "r = heatsight.fit(str(files('heatsight.demo_data') / 'platen.toml')); "
            "print(round(r.raw.summary['total_power_W']))")
    proc = subprocess.run([sys.executable, "-c", code, str(site)], cwd=notebook, env=env,
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert abs(int(proc.stdout.split()[-1]) - 818) <= 5  # demo truth.json: 818.2 W
    proc = subprocess.run([sys.executable, "-m", "heatsight", "demo", "--out", "out"], cwd=notebook,
                          env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert (notebook / "out" / "report.html").is_file()
    assert not any((site / name).exists() for name in ("forward", "inverse", "data_io"))
