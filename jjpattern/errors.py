"""Exceptions that carry a message meant for the user."""


class InputError(ValueError):
    """Bad input or usage: one sentence naming the file, column or row and the fix.

    The command line prints the message and exits with status 2.
    """
