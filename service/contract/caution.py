"""The caution shown beside every verdict (API answers, pages, README)."""

CAUTION = (
    "An alias verdict is a hypothesis about the measurement, not about the machine. Before "
    "a peak is dismissed in a decision about machine protection or safety, confirm it with "
    "a second sample rate or a wider-band measurement, and follow the applicable standards, "
    "site procedures and qualified personnel."
)
