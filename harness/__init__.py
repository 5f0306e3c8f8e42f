"""boundbreaker's engine: run online learners against adversaries, batched
over independent replicas, and judge their claimed bounds.

The public names (see DEVELOPERS.md and the design contract):

    from harness import Learner, Adversary, History, per_replica, run, RunResult
    from harness import Claim, certify, Certificate
    from harness import landscape
"""

from .errors import AdversaryFault, BoundbreakerError, ConfigError, LearnerFault
from .protocol import Adversary, History, Learner, per_replica
from .runner import RunResult, run
from .claims import Claim
from .certify import Certificate, certify
from .landscape import landscape
from .search import Counterexample, replay, search

__version__ = "0.1.0"

__all__ = [
    "Learner", "Adversary", "History", "per_replica", "run", "RunResult",
    "BoundbreakerError", "ConfigError", "LearnerFault", "AdversaryFault",
    "search", "Counterexample", "replay",
    "Claim", "certify", "Certificate",
    "landscape",
]
