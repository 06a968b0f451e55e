"""Errors raised for bad user input; the CLI turns them into one line and exit code 2."""


class SpecError(ValueError):
    """A field of an instance, demand, policy or run setting is missing, mistyped or out of range.

    The message starts with the field name and states the allowed range.
    """


class BudgetError(RuntimeError):
    """A computation would exceed its configured state or memory budget; the message has the estimate."""


class SimulationOnly(BudgetError):
    """The instance has no exact face (e.g. lead times that may cross): it can only be simulated.

    A BudgetError, so that "exact where possible, else simulation" falls back as for a size refusal.
    """
