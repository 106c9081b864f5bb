"""Where the server's own files are: page templates, static files and the demo scenario.

A source checkout (or an editable install) uses the top-level folders beside
``app/``. An installed wheel carries the same folders as data files under
``<prefix>/share/arrowmoot/`` (see ``[tool.setuptools.data-files]`` in
pyproject.toml); they are found through the installed distribution's own file
list, so a virtual environment, a ``--user`` install and a system install all
work, whatever the current directory.
"""

from __future__ import annotations

import sys
from functools import lru_cache
from importlib import metadata
from pathlib import Path

__all__ = ["FOLDERS", "resource_dir", "MissingResources"]

FOLDERS = ("static", "templates", "sample_data")
DISTRIBUTION = "arrowmoot"
SOURCE_ROOT = Path(__file__).resolve().parent.parent
_SHARE = ("share", DISTRIBUTION)


class MissingResources(RuntimeError):
    """The installed package lacks one of its folders (a broken or partial install)."""


@lru_cache(maxsize=None)
def resource_dir(name: str) -> Path:
    """The folder ``name`` (one of :data:`FOLDERS`) for this copy of the package."""
    if name not in FOLDERS:
        raise ValueError(f"unknown resource folder {name!r}; use one of {', '.join(FOLDERS)}")
    source = SOURCE_ROOT / name
    if (SOURCE_ROOT / "pyproject.toml").is_file() and source.is_dir():
        return source
    installed = _installed_dir(name)
    if installed is not None:
        return installed
    raise MissingResources(
        f"Arrowmoot's {name} folder is missing: neither {source} nor an installed "
        f"share/{DISTRIBUTION}/{name} exists; reinstall the package"
    )


def _installed_dir(name: str) -> Path | None:
    wanted = (*_SHARE, name)
    try:
        dist = metadata.distribution(DISTRIBUTION)
    except metadata.PackageNotFoundError:
        return _under_prefix(wanted)
    for entry in dist.files or []:
        parts = Path(str(entry)).parts
        for i in range(len(parts) - len(wanted)):
            if parts[i:i + len(wanted)] == wanted:
                folder = Path(str(dist.locate_file(Path(*parts[:i + len(wanted)])))).resolve()
                if folder.is_dir():
                    return folder
    return _under_prefix(wanted)


def _under_prefix(wanted: tuple[str, ...]) -> Path | None:
    folder = Path(sys.prefix, *wanted)
    return folder if folder.is_dir() else None
