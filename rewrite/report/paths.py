"""How paths are shown in reports: relative to the working directory when under it."""
from __future__ import annotations

import os
from pathlib import Path


def shown(path: str) -> str:
    try:
        relative = Path(os.path.abspath(path)).relative_to(Path.cwd())
        return relative.as_posix()
    except ValueError:
        return Path(path).as_posix()
