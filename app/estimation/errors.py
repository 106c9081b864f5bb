"""Problems with the data, the mapping or the requested estimate.

Each error carries a message for the analyst that names the file, column or
variable at fault, and a short ``code``. The web layer turns :class:`DataError`
into a 4xx JSON body (``status``: 413 for an oversized file, 422 otherwise);
the command line prints the message and exits with code 2. Nothing here ever
touches a session: refusing data leaves what was already there untouched.
"""

from __future__ import annotations


class DataError(ValueError):
    """Base class: the data, the mapping or the request cannot be used."""

    code = "bad_data"
    status = 422

    def __init__(self, message: str, *, item: object | None = None):
        super().__init__(message)
        self.message = message
        self.item = item

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
    code = "file_too_large"
    status = 413


class BadMapping(DataError):
    code = "bad_mapping"


class BadMethod(DataError):
    code = "bad_method"


class NotIdentified(DataError):
    """The diagram, with the unmeasured variables it has, does not identify the effect."""

    code = "not_identified"


class FitFailed(DataError):
    code = "fit_failed"
