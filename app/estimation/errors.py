"""Problems with the data, the mapping or the requested estimate.

Each error carries a message for the analyst that names the file, column or
variable at fault, and a short ``code``. Each is an :class:`~app.errors.AppError`
of the ``invalid`` kind (``too_large`` for an oversized file), which the web
layer answers with 422 (413);
the command line prints the message and exits with code 2. Nothing here ever
touches a session: refusing data leaves what was already there untouched.
"""

from __future__ import annotations

from ..errors import Unprocessable


class DataError(Unprocessable, ValueError):
    """Base class: the data, the mapping or the request cannot be used."""

    code = "bad_data"

    def __init__(self, message: str, *, item: object | None = None):
        super().__init__(message, item=item)

    def to_json(self) -> dict:
        return {"code": self.code, "message": self.message, "item": self.item}


class NotATable(DataError):
    code = "not_a_table"


class EmptyTable(DataError):
    code = "empty_table"


class TooFewRows(DataError):
    code = "too_few_rows"


class AllMissingColumn(DataError):
    code = "all_missing_column"


class ConstantColumn(DataError):
    code = "constant_column"


class CollinearColumns(DataError):
    code = "collinear_columns"


class NonNumericColumn(DataError):
    code = "non_numeric_column"


class FileTooLarge(DataError):
    kind = "too_large"
    code = "file_too_large"


class BadMapping(DataError):
    code = "bad_mapping"


class BadMethod(DataError):
    code = "bad_method"


class NotIdentified(DataError):
    """The diagram, with the unmeasured variables it has, does not identify the effect."""

    code = "not_identified"


class FitFailed(DataError):
    code = "fit_failed"
