"""The research-use caution that every summary, report and scan file carries."""

CAUTION = (
    "Research software, not a medical device: these results are hypotheses about cell "
    "populations under stated assumptions, not predictions or advice for any patient. "
    "Defer to clinical practice."
)
