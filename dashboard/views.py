"""The numbered steps of the drawing board page, gathered from their files (one step per file,
plus step_base for what they share). Each step presents a DrawingBoard and forwards the user's
actions to it (Panel's "DataStore + Views" structure). Import from here; the names stay put.
"""
from __future__ import annotations

import warnings

from .comparison_step import COMPARE_SIZES, ComparisonStep
from .generator_step import BATCH_SIZES, GeneratorStep
from .geometry_step import GeometryStep
from .life_step import LifeStep
from .live_check_step import LiveCheckStep
from .model_step import ModelStep
from .report_step import ReportStep
from .step_base import (
    HEAD_CSS, STEP_STYLES, Step, TABLE_CSS, TEXT_CSS, caution_banner, scenario_titles, text_pane)

__all__ = [
    "BATCH_SIZES", "COMPARE_SIZES", "ComparisonStep", "GeneratorStep", "GeometryStep", "HEAD_CSS", "LifeStep",
    "LiveCheckStep", "ModelStep", "ReportStep", "STEP_STYLES", "Step", "TABLE_CSS", "TEXT_CSS", "caution_banner",
    "scenario_titles", "text_pane"]


# ---- renamed names ------------------------------------------------------------------------------

_RENAMED = {"Cell": "Step", **{f"{k}Cell": f"{k}Step" for k in
            ("Model", "Generator", "LiveCheck", "Geometry", "Comparison", "Life", "Report")}}


def __getattr__(name: str):
    """The sections were once called cells (``ModelCell``, ...): the old names still work for one
    release, with a warning."""
    if name in _RENAMED:
        warnings.warn(f"lifedraw.dashboard.views.{name} is deprecated; use {_RENAMED[name]}",
                      DeprecationWarning, stacklevel=2)
        return globals()[_RENAMED[name]]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
