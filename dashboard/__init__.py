"""lifedraw's browser drawing board: per-session state, steps, plots, the app shell and the HTML report.
Built on Panel, HoloViews and Bokeh; the engine never imports it, the command line does.

Layout: ``state`` (what the user chose and what the engine derived), ``plots``
(pictures and tables from plain arrays), ``views`` (the numbered steps),
``app`` (the page and the server), ``report`` (the standalone HTML file).
"""
