"""The terminal survey app (``mapper walk``): a thin shell over the survey file and the engine.

:class:`~mapper.app.session.WalkSession` holds the walk's logic without any user interface;
:class:`~mapper.app.walk_app.WalkApp` is the Textual application around it.
"""

from mapper.app.session import WalkSession, parse_entry
from mapper.app.walk_app import WalkApp

__all__ = ["WalkApp", "WalkSession", "parse_entry"]
