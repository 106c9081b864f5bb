"""The application layer: sessions, members' keys, commands, record import, data, analysis.

:class:`~app.sessions.service.Sessions` is the one entry point; the web layer,
the command line and the app factory call it and never write the store.
"""

from .analysis import AnalysisRunner
from .service import IMPORT_MODES, SOURCE_KEY, Sessions

__all__ = ["Sessions", "AnalysisRunner", "IMPORT_MODES", "SOURCE_KEY"]
