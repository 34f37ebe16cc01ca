"""Error types of lossbudget.

Bad input in a design file, a dict of the same shape, or a command-line quantity raises
:class:`DesignError`. Each problem names the source, the key path and what was expected
against what was found; the loader gathers every problem of a file into one error.
"""

from __future__ import annotations


class DesignError(ValueError):
    """Bad input: one or more problems, each ``source: key.path: message``."""

    def __init__(self, problems: list[str] | str):
        if isinstance(problems, str):
            problems = [problems]
        self.problems = list(problems)
        super().__init__("\n".join(self.problems))
