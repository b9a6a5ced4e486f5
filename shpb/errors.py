"""Exception types. Every message is one line naming the file, field and what was expected."""


class ShpbError(Exception):
    """Base class of the errors the CLI reports as one line (no traceback)."""


class InputError(ShpbError, ValueError):
    """Bad input: a missing file, a wrong key or column, an impossible value.

    Parameters
    ----------
    message : str
        What is wrong and what was expected.
    source : str, optional
        The file (and key, row or column) the problem was found in; prefixed
        to the message as ``source: message``.
    """

    def __init__(self, message, source=None):
        source = str(source).rstrip(": ") if source else source
        self.source = source
        self.bare_message = message
        super().__init__(f"{source}: {message}" if source else message)


class AnalysisError(ShpbError):
    """The data were read but cannot be reduced (e.g. no pulse found)."""


class Interrupted(KeyboardInterrupt):
    """A run stopped by SIGINT or SIGTERM; the message says what was finished.

    A subclass of :class:`KeyboardInterrupt`, so code that stops on Ctrl-C
    stops on it too. The CLI prints the message and exits with status 130.
    """


#: Exit statuses of every ``shpb`` command (README "Exit status"); the CLI is their only user.
EXIT_VALID = 0
EXIT_NOT_VALID = 1
EXIT_INPUT = 2
EXIT_INTERNAL = 3
EXIT_INTERRUPTED = 130
