"""The layers point down only: engine <- dashboard <- command line.

The contracts live in pyproject.toml ([tool.importlinter]) and are checked by import-linter
(a maintained contract checker) on the installed wheel's layout in tests/test_wheel.py; here, a
quick runtime check that the engine stays usable from plain Python, and that no input path can
reach Python's evaluator.
"""
import re
import subprocess
import sys
from pathlib import Path


def test_engine_imports_no_ui_library():
    code = (
        "import sys, lifedraw\n"
        "from lifedraw.engine.scenarios import load_scenario\n"
        "s = lifedraw.fit(load_scenario('sensor-bathtub').target())\n"
        "s.sample(1000, 1)\n"
        "lifedraw.check(s, n=2000)\n"
        "bad = [m for m in ('panel', 'bokeh', 'holoviews', 'param') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"the engine pulled in UI libraries: {out.stdout.strip()}"


def test_no_top_level_engine_or_dashboard_module_is_importable_outside_the_checkout(tmp_path):
    # The installed names are lifedraw.*; generic top-level names would collide with other packages.
    code = "import importlib.util; print(importlib.util.find_spec('engine'), importlib.util.find_spec('dashboard'))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=tmp_path)
    assert out.stdout.strip() == "None None"


def test_no_eval_or_exec_in_engine():
    # The formula language must never hand user text to Python's evaluator.
    root = Path(__file__).resolve().parent.parent / "engine"
    offenders = []
    for path in root.rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        for m in re.finditer(r"(?<![\w.])(eval|exec|compile)\s*\(", text):
            offenders.append(f"{path.name}: {m.group(0)}")
    assert offenders == []
