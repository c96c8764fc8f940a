"""Hostile inputs shared by the escaping tests and the browser tests: a scenario whose every piece
of text tries to run script (issue 14, item 2), and the browser-side flag a successful attack sets.

Each payload pushes its own tag onto ``window.__pwned``; a page that escapes its
sinks never creates that array. The payloads cover the usual ways out of a text
sink: an ``onerror`` image, an ``onload`` SVG, a literal ``<script>``, a closing
``</script>`` (to break out of an inline JSON block), a Markdown ``javascript:``
link and quotes that would end an attribute.
"""
from __future__ import annotations

FLAG = "__pwned"


def payload(tag: str, short: bool = False) -> str:
    """Markup that records ``tag`` in window.__pwned if it ever runs; ``short`` (under 100 characters,
    the scenario loader's limit for a time unit) keeps the image and the ``</script>`` break-out only."""
    push = f'(window.{FLAG}=window.{FLAG}||[]).push("{tag}")'
    if short:
        return f"</script><img src=x onerror={push}>"
    return (f"<img src=x onerror={push}><svg onload={push}></svg><script>{push}</script>"
            f"</script><script>{push}</script>[link](javascript:{push})\"'>")


PARAMETER = '<b>k</b>"x'


def hostile_scenario_toml() -> str:
    """A valid scenario (a Weibull model) with markup in every text field."""
    def lit(s):  # a TOML multi-line literal string holds anything but three single quotes
        return "'''" + s + "'''"
    return f"""
title = {lit("Hostile " + payload("title"))}
story = {lit("First paragraph " + payload("story") + chr(10) + chr(10) + "Second & last.")}
time_unit = {lit(payload("unit", short=True))}

[run]
method = "auto"
seed = 7
sample_size = 5000
mission_times = [500.0]
tolerance = 1e-10

[parameters]
{lit(PARAMETER).replace("'''", "'")} = {{ value = 2.0, min = 1.0, max = 3.0, step = 0.1, label = {lit(payload("label"))} }}

[model]
kind = "family"
family = "weibull"
params = {{ shape = {lit(PARAMETER).replace("'''", "'")}, scale = 1000.0 }}
"""


#: A scenario file name that is itself markup (legal on POSIX file systems: no slash, no NUL).
HOSTILE_NAME = '<svg onload=(window.__pwned=window.__pwned||[]).push("name")>'


def write_hostile_scenarios(folder) -> None:
    """``hostile.toml`` and a copy under a markup file name, for $LIFEDRAW_SCENARIOS."""
    from pathlib import Path
    folder = Path(folder)
    text = hostile_scenario_toml()
    (folder / "hostile.toml").write_text(text, encoding="utf-8")
    (folder / f"{HOSTILE_NAME}.toml").write_text(text, encoding="utf-8")
