"""The drawing board's per-session state, gathered from the files that hold one idea each:
board (the session: choices, refits, the stream), model_editing, board_data, cdf_table,
draw_accumulator, check_data, model_inputs. Import from here; the names stay put.
"""
from __future__ import annotations


from .board import DrawingBoard, PLANNED_DRAWS, STREAM_LIMIT, TOLERANCES, TRACE_LIMIT
from .board_data import BoardData
from .cdf_table import CDF_NODES, CdfTable, FAR_Q, HIST_BINS, LOW_Q, TAIL_NODES, VIEW_Q, histogram_edges
from .check_data import PLOT_POINTS, histogram_payload, model_on_bins, pp_payload, qq_payload
from .draw_accumulator import DrawAccumulator, RESERVOIR_SIZE
from .model_editing import ModelEditing
from .model_inputs import FORMULA_KINDS, parse_assignments, parse_mission_times, parse_support, parse_time_unit

__all__ = [
    "BoardData", "CDF_NODES", "CdfTable", "DrawAccumulator", "DrawingBoard", "FAR_Q", "FORMULA_KINDS",
    "HIST_BINS", "LOW_Q", "ModelEditing", "PLANNED_DRAWS", "PLOT_POINTS", "RESERVOIR_SIZE", "STREAM_LIMIT",
    "TAIL_NODES", "TOLERANCES", "TRACE_LIMIT", "VIEW_Q", "histogram_edges", "histogram_payload", "model_on_bins",
    "parse_assignments", "parse_mission_times", "parse_support", "parse_time_unit", "pp_payload", "qq_payload"]
