"""The built wheel works outside the repository: installed into a fresh virtual environment and
run from another directory, the command and the API work, scenarios are found as package data,
no generic top-level module is installed, and the layer contracts hold on the installed layout.

The fresh environment reuses the already-installed dependencies (numpy, scipy, Panel, ...) through
a path file, so the test needs no network; lifedraw itself comes only from the wheel.
"""
from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
pytestmark = pytest.mark.wheel


def _run(args, cwd, env=None, check=True, timeout=300):
    out = subprocess.run(args, cwd=cwd, capture_output=True, text=True, env=env, timeout=timeout)
    if check and out.returncode != 0:
        raise AssertionError(f"{args} failed ({out.returncode}):\n{out.stdout}\n{out.stderr}")
    return out


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    dist = tmp_path_factory.mktemp("dist")
    _run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "--no-build-isolation", "-w", str(dist),
          str(ROOT)], cwd=dist)
    (path,) = dist.glob("lifedraw-*.whl")
    return path


@pytest.fixture(scope="module")
def venv(wheel, tmp_path_factory) -> Path:
    home = tmp_path_factory.mktemp("venv")
    _run([sys.executable, "-m", "venv", "--without-pip", str(home)], cwd=home)
    site = Path(_run([str(home / "bin" / "python"), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"],
                     cwd=home).stdout.strip())
    # The dependencies (and pip) of the test environment, as a plain path entry: the editable
    # lifedraw install there is a .pth hook, which a path entry does not run.
    (site / "lifedraw_test_dependencies.pth").write_text(sysconfig.get_path("purelib") + "\n")
    _run([str(home / "bin" / "python"), "-m", "pip", "install", "--quiet", "--no-deps", "--no-index", str(wheel)],
         cwd=home)
    return home


@pytest.fixture()
def elsewhere(tmp_path) -> Path:
    folder = tmp_path / "work"
    folder.mkdir()
    return folder


def _env(**extra) -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "LIFEDRAW_SCENARIOS")}
    env.update(extra)
    return env


def test_the_wheel_holds_one_namespace_and_the_scenarios(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    tops = {n.split("/")[0] for n in names if not n.split("/")[0].endswith(".dist-info")}
    assert tops == {"lifedraw"}
    assert sum(n.startswith("lifedraw/scenarios/") and n.endswith(".toml") for n in names) >= 10
    metadata = zipfile.ZipFile(wheel).read(next(n for n in names if n.endswith("METADATA"))).decode()
    assert "License-Expression: MIT" in metadata          # SPDX string (PEP 639), not the deprecated table


def test_the_api_imports_from_the_installed_wheel(venv, elsewhere):
    code = ("import importlib.util, lifedraw\n"
            "print(lifedraw.__file__)\n"
            "print(importlib.util.find_spec('engine'), importlib.util.find_spec('dashboard'))\n"
            "t = lifedraw.hazard_formula('a*b*t**(b-1)', params=dict(a=1e-3, b=1.5))\n"
            "s = lifedraw.fit(t)\n"
            "print(round(float(s.sample(10, 1).mean()), 6) > 0, lifedraw.__version__)\n")
    out = _run([str(venv / "bin" / "python"), "-c", code], cwd=elsewhere, env=_env()).stdout.splitlines()
    assert out[0].startswith(str(venv)), out[0]
    assert out[1] == "None None"
    assert out[2].startswith("True ")


def test_the_command_works_from_another_directory(venv, elsewhere):
    lifedraw = str(venv / "bin" / "lifedraw")
    listing = _run([lifedraw, "scenarios"], cwd=elsewhere, env=_env()).stdout
    assert "gearbox-wearout" in listing and "pumping-station-system" in listing
    _run([lifedraw, "sample", "gearbox-wearout", "-n", "2000", "-o", "draws.npy"], cwd=elsewhere, env=_env())
    assert (elsewhere / "draws.npy").stat().st_size > 2000 * 8
    check = _run([lifedraw, "check", "gearbox-wearout", "-n", "20000"], cwd=elsewhere, env=_env())
    assert "Kolmogorov" in check.stdout
    _run([lifedraw, "report", "gearbox-wearout", "-n", "5000", "-o", "report.html"], cwd=elsewhere, env=_env(),
         timeout=600)
    page = (elsewhere / "report.html").read_text(encoding="utf-8")
    assert "Bokeh" in page and "http://" not in page.split("<body", 1)[1][:200]


def test_a_folder_of_the_users_own_scenarios_is_found(venv, elsewhere):
    own = elsewhere / "my-scenarios"
    own.mkdir()
    text = (ROOT / "scenarios" / "gearbox-wearout.toml").read_text(encoding="utf-8")
    (own / "yard-crane-gearbox.toml").write_text(text.replace("Wear-out of baggage-conveyor gearboxes",
                                                              "Yard crane gearboxes"), encoding="utf-8")
    listing = _run([str(venv / "bin" / "lifedraw"), "scenarios"], cwd=elsewhere,
                   env=_env(LIFEDRAW_SCENARIOS=str(own))).stdout
    assert "yard-crane-gearbox" in listing and "Yard crane gearboxes" in listing
    assert "gearbox-wearout" in listing


def test_the_layer_contracts_hold_on_the_installed_layout(venv, elsewhere):
    # import-linter (grimp) walks the installed package; the contracts are in pyproject.toml.
    code = ("import sys\nfrom importlinter.cli import lint_imports\n"
            f"sys.exit(lint_imports(config_filename={str(ROOT / 'pyproject.toml')!r}, no_cache=True))\n")
    out = _run([str(venv / "bin" / "python"), "-c", code], cwd=elsewhere, env=_env(), check=False)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "2 kept, 0 broken" in out.stdout


def test_the_layer_check_fails_when_the_engine_imports_the_dashboard(venv, elsewhere):
    # The checker must be able to fail: the installed package, copied, with one upward import injected.
    import shutil
    site = Path(_run([str(venv / "bin" / "python"), "-c", "import lifedraw, os; print(os.path.dirname(lifedraw.__file__))"],
                     cwd=elsewhere, env=_env()).stdout.strip())
    injected = elsewhere / "injected"
    shutil.copytree(site, injected / "lifedraw")
    life = injected / "lifedraw" / "engine" / "life.py"
    life.write_text(life.read_text(encoding="utf-8") + "\nfrom ..dashboard import plots  # injected fault\n",
                    encoding="utf-8")
    code = ("import sys\nfrom importlinter.cli import lint_imports\n"
            f"sys.exit(lint_imports(config_filename={str(ROOT / 'pyproject.toml')!r}, no_cache=True))\n")
    out = _run([str(venv / "bin" / "python"), "-c", code], cwd=elsewhere, env=_env(PYTHONPATH=str(injected)),
               check=False)
    assert out.returncode != 0
    assert "lifedraw.engine.life -> lifedraw.dashboard.plots" in out.stdout


def test_the_installed_server_serves_its_scripts_itself(venv, elsewhere):
    # No internet: every script and stylesheet the page names comes from this server (Panel and Bokeh
    # serve them from the installed packages), none from a content network.
    import re
    import time
    import urllib.error
    import urllib.parse
    import urllib.request
    from served import free_port
    port = free_port()
    proc = subprocess.Popen([str(venv / "bin" / "lifedraw"), "serve", "--port", str(port)], cwd=elsewhere,
                            env=_env(), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}/"
    try:
        deadline = time.time() + 90
        while True:
            try:
                page = urllib.request.urlopen(base, timeout=10).read().decode("utf-8")
                break
            except (urllib.error.URLError, OSError):
                assert proc.poll() is None and time.time() < deadline, "the installed server did not start"
                time.sleep(0.5)
        sources = re.findall(r'<(?:script|link)[^>]+(?:src|href)="([^"]+)"', page)
        assert sources, "the page names no scripts"
        for source in sources:
            assert not source.startswith(("http://", "https://", "//")) or source.startswith(base), source
            with urllib.request.urlopen(urllib.parse.urljoin(base, source), timeout=30) as answer:
                assert answer.status == 200, source
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
