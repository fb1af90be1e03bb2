"""The caution that every decision printout and report carries."""

CAUTION = (
    "CAUTION: decision support only. Safety-critical acceptance follows the applicable "
    "standards, the customer's requirements and a qualified engineer's sign-off."
)

#: Standards a report defers to (named only; nothing is copied from them).
STANDARDS = (
    "ISO 2859-1 (sampling by attributes)",
    "ISO 3951 (sampling by variables)",
    "IEC 61123 (success-ratio compliance tests)",
    "IEC 61124 (constant failure rate compliance tests)",
    "IEC 61649 (Weibull analysis)",
    "MIL-HDBK-781A (reliability test methods)",
)
