"""The package's version and the one general caution (imports nothing).

The version is written here once; ``pyproject.toml`` reads it from this file
(``[tool.setuptools.dynamic]``), so the installed metadata and
``layers.__version__`` cannot disagree, and no command pays for
``importlib.metadata`` at start-up.
"""

__version__ = "0.1.0"

CAUTION = (
    "Engineering estimate only. Touch-safety limits, condensation control and "
    "insulation requirements are set by local building, energy and safety codes "
    "and licensed practice, which take precedence."
)
