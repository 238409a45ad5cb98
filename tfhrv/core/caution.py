"""The research-use caution, worded once for the command line, files and reports."""

CAUTION = (
    "For research use only; not a medical device and not for diagnosis. Local regulations "
    "and licensed clinical judgement prevail. Literature reference values are context, "
    "not a verdict on a person."
)
