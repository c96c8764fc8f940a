"""The engine is usable from plain Python: importing and using it loads no UI library."""
import subprocess
import sys


def test_engine_imports_no_ui_library():
    code = (
        "import sys, engine\n"
        "from engine.scenarios import load_scenario\n"
        "s = engine.fit(load_scenario('sensor-bathtub').target())\n"
        "s.sample(1000, 1)\n"
        "engine.check(s, n=2000)\n"
        "bad = [m for m in ('panel', 'bokeh', 'holoviews') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"engine pulled in UI libraries: {out.stdout.strip()}"


def test_no_eval_or_exec_in_engine():
    # The formula language must never hand user text to Python's evaluator.
    from pathlib import Path
    import re
    root = Path(__file__).resolve().parent.parent / "engine"
    offenders = []
    for path in root.rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        for m in re.finditer(r"(?<![\w.])(eval|exec|compile)\s*\(", text):
            offenders.append(f"{path.name}: {m.group(0)}")
    assert offenders == []
