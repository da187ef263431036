"""Version of the package (single source: the installed distribution's metadata)."""

from importlib import metadata

try:
    __version__ = metadata.version("driftband")
except metadata.PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"
