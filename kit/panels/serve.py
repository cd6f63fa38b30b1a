"""Jupyter server extension: serve BokehJS from the local Bokeh installation.

Enabled with ``jupyter lab --ServerApp.jpserver_extensions="{'kit.panels.serve': True}"``
(what ``make lab`` and the browser tests should pass), it answers
``{base_url}rotorbook/bokehjs/<bokeh version>/<file>`` from ``bokeh/server/static/js`` for
logged-in users, so notebooks load BokehJS from this machine and never store it.
"""

from __future__ import annotations

import os


def bokehjs_dir() -> str:
    """Folder of the BokehJS bundles of the installed Bokeh."""
    import bokeh

    return os.path.join(os.path.dirname(bokeh.__file__), "server", "static", "js")


def _jupyter_server_extension_points():
    return [{"module": "kit.panels.serve"}]


def _load_jupyter_server_extension(serverapp) -> None:
    import bokeh
    from jupyter_server.base.handlers import AuthenticatedFileHandler
    from jupyter_server.utils import url_path_join

    web_app = serverapp.web_app
    base = web_app.settings.get("base_url", "/")
    route = url_path_join(base, "rotorbook", "bokehjs", bokeh.__version__, "(.*)")
    web_app.add_handlers(".*$", [(route, AuthenticatedFileHandler, {"path": bokehjs_dir()})])
    serverapp.log.info("rotorbook: serving BokehJS %s at %s", bokeh.__version__, route)
