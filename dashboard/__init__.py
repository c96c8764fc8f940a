"""lifedraw's browser drawing board: per-session state, steps, plots, the app shell and the HTML report.
Built on Panel, HoloViews and Bokeh; the engine never imports it, the command line does.

Layout: ``state`` gathers the per-session state (``board``, ``model_editing``, ``board_data``,
``cdf_table``, ``draw_accumulator``, ``check_data``, ``model_inputs``); ``plots``,
``reliability_plots`` and ``life_curves`` make the pictures from plain arrays, ``html_tables`` the
tables; ``views`` gathers the numbered steps (``step_base`` and one ``*_step`` file each); ``app`` is
the page and the server, ``report`` the standalone HTML file, its pictures drawn where
``picture_process`` says (a second process for the command line).
"""
