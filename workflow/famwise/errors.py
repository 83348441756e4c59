"""Errors a user can cause, shown as one clear line by the command line."""


class UserError(Exception):
    """Bad input: a spec key, a data file or a subject that the user can fix.

    The command line prints ``str(error)`` alone and exits with status 2.
    The message names the file, the spec key (and YAML line) or the subject,
    what was expected and what was found.
    """


class FamwiseWarning(UserWarning):
    """Something the user should know that does not stop the run."""
