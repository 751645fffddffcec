"""Exceptions meant for users.

A :class:`UserError` carries one line that names the file, key or row at
fault and says what to do.  The command line prints that line and exits with
code 2 (no traceback unless ``--debug``); library users catch it as usual.
"""


class UserError(Exception):
    """A problem with the user's input (file, configuration, option).

    The message is a single line naming the offending file / key / row.
    """

    exit_code = 2


class InputFileError(UserError):
    """A data file (spectrum, covariance, filter, opacity table) is unusable."""


class ConfigError(UserError):
    """A fit or simulation configuration key is missing, unknown or invalid."""


class OpacityTableError(UserError):
    """An opacity table is malformed, has a wrong checksum or wrong axes."""


class ModelEvaluationError(Exception):
    """The forward model cannot be evaluated for these parameters.

    Raised inside the hot path (e.g. temperature outside an opacity table's
    range, non-finite flux).  ``reason`` is a short, stable key that the
    likelihood counts and reports (e.g. ``"T above table range"``).
    """

    def __init__(self, reason: str, detail: str = ""):
        super().__init__(f"{reason}: {detail}" if detail else reason)
        self.reason = reason
        self.detail = detail
