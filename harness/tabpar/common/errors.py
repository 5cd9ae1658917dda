"""The one exception type that reaches users as a sentence instead of a traceback."""


class UserError(Exception):
    """A mistake in the user's input (file, column, value, option).

    The message is one sentence naming what is wrong and what to do; the CLI prints it and
    exits with code 2.
    """

    exit_code = 2
