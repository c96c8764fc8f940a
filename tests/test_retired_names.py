"""Names of our own: the retired product word ("workbench") and the notebook word for the page's
numbered sections ("cell"/"cells") appear in no user-facing text: page strings, README, guide,
report, command-line help. Only the deprecated alias that keeps the old class name working may
mention it (house rule for renamed interfaces).
"""
import ast
import re
import warnings
from pathlib import Path

import pytest

from lifedraw.cli.main import build_parser

ROOT = Path(__file__).resolve().parent.parent
RETIRED = re.compile(r"\bworkbench(es)?\b|\bcells?\b", re.IGNORECASE)
DOCUMENTS = ("README.md", "DEVELOPERS.md")
PAGE_MODULES = sorted((ROOT / "dashboard").glob("*.py"))
#: Where the old names may be defined as deprecated aliases (and nowhere else).
ALIAS_HOLDERS = ("__getattr__", "_RENAMED")


def retired_words(text: str) -> list[str]:
    return [m.group(0) for m in RETIRED.finditer(text)]


def page_strings(path: Path) -> list[str]:
    """Every string constant of a dashboard module, except docstrings and the deprecated-alias code."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip = set()
    for node in ast.walk(tree):
        named = (isinstance(node, ast.FunctionDef) and node.name in ALIAS_HOLDERS) or (
            isinstance(node, ast.Assign) and any(getattr(t, "id", "") in ALIAS_HOLDERS for t in node.targets))
        if named:
            skip.update(id(n) for n in ast.walk(node))
    # Docstrings speak to developers (where "cell" may be a table's); the page never shows them.
    for node in ast.walk(tree):
        body = getattr(node, "body", None)
        if isinstance(body, list) and body and isinstance(body[0], ast.Expr) \
                and isinstance(body[0].value, ast.Constant) and isinstance(body[0].value.value, str):
            skip.add(id(body[0].value))
    return [n.value for n in ast.walk(tree)
            if isinstance(n, ast.Constant) and isinstance(n.value, str) and id(n) not in skip]


def test_the_scanner_finds_a_retired_word():
    # The check below can fail: a planted sentence is caught in either spelling.
    assert retired_words("Open the Workbench and run every cell.") == ["Workbench", "cell"]
    assert retired_words("excellent cancellation, stepwise") == []


@pytest.mark.parametrize("name", DOCUMENTS)
def test_the_documents_use_our_own_names(name):
    assert retired_words((ROOT / name).read_text(encoding="utf-8")) == []


@pytest.mark.parametrize("path", PAGE_MODULES, ids=lambda p: p.name)
def test_the_page_and_report_strings_use_our_own_names(path):
    found = [s for s in page_strings(path) if retired_words(s)]
    assert found == []


SUBCOMMANDS = ("scenarios", "sample", "check", "compare", "report", "serve", "generate")


@pytest.mark.parametrize("command", [None, *SUBCOMMANDS])
def test_the_command_line_help_uses_our_own_names(command, capsys):
    with pytest.raises(SystemExit):
        build_parser().parse_args([command, "--help"] if command else ["--help"])
    text = capsys.readouterr().out
    assert "usage:" in text
    assert retired_words(text) == []


def test_a_written_report_uses_our_own_names():
    from lifedraw.dashboard.report import build_report
    from lifedraw.engine.scenarios import load_scenario
    text = build_report(load_scenario("sensor-bathtub"), n=2_000, compare_n=2_000)
    visible = re.sub(r"<script\b.*?</script>|<style\b.*?</style>", "", text, flags=re.DOTALL | re.IGNORECASE)
    assert retired_words(visible) == []


def test_the_screenshot_has_a_name_of_our_own():
    assets = [p.name for p in (ROOT / "dashboard" / "assets").iterdir()]
    assert "drawing-board.png" in assets
    assert [a for a in assets if retired_words(a.replace("-", " ").replace(".", " "))] == []


def test_the_old_step_class_names_still_work_with_a_warning():
    from lifedraw.dashboard import state, views
    with pytest.warns(DeprecationWarning, match="use ModelStep"):
        assert views.ModelCell is views.ModelStep
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert state.DrawingBoard is not None          # the new name does not warn
