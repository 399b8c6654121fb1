"""hydrodrift: weekly efficiency drift, lost energy and alerts for hydro turbine-generator units.

This package holds the application shell (settings, command line, demo fleet). The
pipeline itself lives in the top-level packages ``ingest``, ``store``, ``analytics``,
``jobs`` and ``api`` (see ``DEVELOPERS.md``).
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("hydrodrift")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.2.0"

__all__ = ["__version__"]
