"""matcher: tentative identification of GC peaks from retention indices.

The package is a library first; the ``matcher`` command is a thin layer over it.
Importing :mod:`matcher` is cheap: heavy modules load only when used.

Results are tentative (putative) identifications. Confirmation needs an
authentic reference standard run under the lab's validated method; local
regulations and accredited practice prevail.
"""

__version__ = "0.1.0"

CAUTION = (
    "Results are tentative (putative) identifications, not confirmed identities. "
    "Confirmation needs an authentic reference standard run under the lab's own "
    "validated method; local regulations and accredited practice prevail."
)

__all__ = ["__version__", "CAUTION"]
