"""Exceptions that carry the place of a bad input.

Every input problem the user can fix is raised as a :class:`CaseError` naming
the file, the key and the reason; the command line prints it on one line and
exits with status 2.
"""

from __future__ import annotations

import re

#: At most this many characters of what the user wrote are echoed in a message.
ECHO = 80
_QUOTED = re.compile(r"""(?<![\w'"])('[^'\n]{%d,}'|"[^"\n]{%d,}")(?![\w])""" % (ECHO, ECHO))


def _clip(text: str) -> str:
    """One line, with any quoted piece of input longer than :data:`ECHO` cut short."""
    text = " ".join(str(text).split("\n"))
    return _QUOTED.sub(lambda m: m.group(0)[: ECHO - 4] + "..." + m.group(0)[0], text)


class CaseError(ValueError):
    """Bad input in a case file or a file it refers to.

    Parameters
    ----------
    file : str
        The file that holds the bad input.
    key : str
        Dotted key (``layers[2].thickness``) or, for a series, ``row 14, column T_out``.
    reason : str
        What is wrong, in words the user can act on.
    """

    def __init__(self, file: str, key: str, reason: str) -> None:
        self.file = str(file)
        self.key = _clip(key)
        self.reason = _clip(reason)
        key, reason = self.key, self.reason
        super().__init__(f"{self.file}: {key}: {reason}")


class SeriesError(CaseError):
    """Bad data in a time-series file (a gap, a NaN, an unsorted time...)."""


class ConvergenceWarning(UserWarning):
    """An iteration stopped at its limit before reaching its tolerance."""
