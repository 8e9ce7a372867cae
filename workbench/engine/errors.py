"""Errors the user can act on.

An ``InputError`` carries one readable line that names the file or value and the problem; the
CLI prints it and exits with code 2, the window shows it in a dialog. Anything else is a bug.
"""


class InputError(Exception):
    """A problem with what the user gave us (file, column, option), not with the program."""


class Cancelled(Exception):
    """The user cancelled a running computation."""
