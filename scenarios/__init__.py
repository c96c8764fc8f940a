"""The fictional reliability scenarios shipped with lifedraw, one TOML file each.

Read through ``importlib.resources`` (``lifedraw.engine.scenarios.scenario_files``), so they are
found in an installed wheel as well as in a source checkout.
"""
