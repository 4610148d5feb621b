"""Exceptions carrying the library's messages."""

_STATUS_NAMES = {1: "JG_EINVAL", 2: "JG_ECONFIG", 3: "JG_EIO", 4: "JG_ENOMEM",
                 5: "JG_ENUMERIC", 6: "JG_EINTERRUPT"}


class JeansgrowError(Exception):
    """A failure reported by the library. str(e) is the message the program
    prints after "jeansgrow: "; e.status is the status name ("JG_EINVAL")."""

    def __init__(self, message, status):
        super().__init__(message)
        self.message = message
        self.status = status


class InputError(JeansgrowError, ValueError):
    """Bad input (the program's exit status 2): a parameter, a file, a value."""


class RunError(JeansgrowError, RuntimeError):
    """A failure during the computation (the program's exit status 1); the
    message names the stage, k and z."""


class OutOfMemory(JeansgrowError, MemoryError):
    """The library ran out of memory."""


def error_for(status, message):
    name = _STATUS_NAMES.get(status, "status %d" % status)
    if status in (1, 2, 3):
        kind = InputError
    elif status == 4:
        kind = OutOfMemory
    else:
        kind = RunError
    return kind(message or name, name)
