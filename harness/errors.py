"""The exceptions boundbreaker raises on purpose.

Every message is one line that names the offending field (or learner, round,
file key) and says what to change. The CLI turns each of these into that line
on stderr and exit code 2; nothing here should ever surface as a traceback.
"""


class BoundbreakerError(Exception):
    """Base class: an error whose message is meant for the user as it stands."""


class ConfigError(BoundbreakerError, ValueError):
    """Bad input: a parameter, a size, a campaign file, a saved file.

    The message names the field and the fix, e.g.
    ``"horizon: must be a positive integer, got -3"``.
    """


class LearnerFault(BoundbreakerError, RuntimeError):
    """A learner broke the protocol: raised, returned a bad shape or dtype,
    an action outside [0, n) or NaN. The message names the learner, the round
    and the chunk seed that replays the failure."""


class AdversaryFault(BoundbreakerError, RuntimeError):
    """An adversary broke the protocol: raised, or returned losses of the
    wrong shape or outside [0, 1]."""
