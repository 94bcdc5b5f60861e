"""The exception of a refused or failed headroom command."""


class HeadroomError(Exception):
    """A headroom command refused its input or failed.

    ``str(e)`` is the command's one-line message (what ``headroom`` prints
    after ``error:``); ``exit_code`` is the code the command would exit with
    (2: bad input, 1: the environment failed).
    """

    def __init__(self, message, exit_code=2):
        super().__init__(message, exit_code)
        self.message = message
        self.exit_code = exit_code

    def __str__(self):
        return self.message
