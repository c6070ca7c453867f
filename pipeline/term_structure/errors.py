"""The one error the term-structure lens raises for input a user can fix."""

from __future__ import annotations

from pipeline.errors import AfterwardError

__all__ = ["ModelInputError"]


class ModelInputError(AfterwardError, ValueError):
    """The input cannot support the requested computation; ``str(err)`` is one line naming the
    curve and what is missing (too short a longest tenor, too few month ends, a bad setting).
    Part of the one hierarchy (:mod:`pipeline.errors`): the command line exits 2 on it."""

    exit_code = 2
