"""Where quietgrade keeps its files on each platform.

Nothing here creates a folder: the library creates its folder when it first opens a
file there.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

APP_NAME = "quietgrade"


def user_data_dir(app: str = APP_NAME) -> Path:
    """The platform's own folder for a user's application data, for ``app``.

    - Windows: ``%LOCALAPPDATA%\\app``, else ``~/AppData/Local/app``.
    - macOS: ``~/Library/Application Support/app``.
    - Linux and every other system: ``$XDG_DATA_HOME/app``, else
      ``~/.local/share/app`` (XDG Base Directory Specification, which also says that a
      relative ``XDG_DATA_HOME`` is to be ignored).

    ``sys.platform`` and the environment are read at each call.
    """
    if sys.platform.startswith(("win32", "cygwin")):
        local = os.environ.get("LOCALAPPDATA")
        base = Path(local) if local else Path.home() / "AppData" / "Local"
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Application Support"
    else:
        data = os.environ.get("XDG_DATA_HOME")
        base = Path(data) if data and os.path.isabs(data) else Path.home() / ".local" / "share"
    return base / app
