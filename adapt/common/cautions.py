"""The cautions every summary of legal or clinical work shows: one wording, shared by the demo and the report."""

from __future__ import annotations

# as the demo prints them (wrapped for a terminal)
CAUTIONS = [
    "Cautions: the demo texts are invented. With real legal or clinical text, de-identify before training,",
    "follow the data-protection law that applies to you and your institution's governance (ethics approval,",
    "data-processing agreements), and keep trained models inside that governance: they may memorise rare strings.",
    "These numbers are research measurements, not legal or medical advice.",
]
_DEMO_NOTE = "Cautions: the demo texts are invented. "
# the same sentences for any data, unwrapped
DATA_CAUTION = " ".join(CAUTIONS[:3])[len(_DEMO_NOTE):]
NOT_ADVICE = CAUTIONS[3]
