"""boom-advisory: sonic-boom carpet prediction and crew advisories.

ADVISORY AID ONLY. This package is not certified flight software and is not a
primary means of navigation or of regulatory compliance. Local regulations and
licensed practice govern supersonic flight.
"""

__version__ = "0.1.0"

SAFETY_CAUTION = (
    "CAUTION: boom-advisory is an advisory aid, not certified flight software. "
    "Local regulations and licensed practice govern supersonic flight."
)

__all__ = ["SAFETY_CAUTION", "Advisor", "Advisory", "__version__"]


def __getattr__(name: str):
    """Lazy top-level API: ``advisory.Advisor`` without importing numba at package import."""
    if name == "Advisor":
        from advisory.pipeline.advisor import Advisor

        return Advisor
    if name == "Advisory":
        from advisory.pipeline.results import Advisory

        return Advisory
    raise AttributeError(f"module 'advisory' has no attribute {name!r}")
