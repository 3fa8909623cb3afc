"""Errors that the command line turns into one clear line and exit code 2."""


class InputError(ValueError):
    """Bad input: the message names the file, row or option and what to do."""
