"""The package's version and the one general caution (imports nothing from the package)."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("layers")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

CAUTION = (
    "Engineering estimate only. Touch-safety limits, condensation control and "
    "insulation requirements are set by local building, energy and safety codes "
    "and licensed practice, which take precedence."
)
