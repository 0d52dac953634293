"""Choose a code and an interleaving depth that meet a residual error target on a channel,
at the lowest overhead (see `bitmend.planning.search` for how)."""

from __future__ import annotations

from bitmend.planning.search import *  # noqa: F401,F403
from bitmend.planning.search import (Candidate, Plan, PlanError, Prediction, RepairChoice, RepairVerification,
                                     Verification, _channel, _weights, make_plan, parse_overhead, predict,
                                     predict_depths, verify_candidate, verify_repair)
