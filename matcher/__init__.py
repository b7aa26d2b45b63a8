"""matcher: tentative identification of GC peaks from retention indices.

The package is a library first; the ``matcher`` command is a thin layer over it.
The whole job from Python, with one import::

    import matcher

    lib = matcher.open_library("lab.sqlite")
    cal = matcher.calibrate("examples/ladder.csv")            # a path or a DataFrame
    result = matcher.screen("examples/run.csv", calibration=cal, phase_class="slightly-polar", library=lib)
    result.table                                               # one row per peak and candidate
    result.to_csv("shortlist.csv"); result.to_html("report.html")
    matcher.query(1031, "slightly-polar", mol_ion=136, library=lib).candidates

Importing :mod:`matcher` is cheap: the public names load on first use
(PEP 562 module ``__getattr__``), see :mod:`matcher.api`. Everything a user
can fix raises :class:`MatcherError`.

Results are tentative (putative) identifications. Confirmation needs an
authentic reference standard run under the lab's validated method; local
regulations and accredited practice prevail.
"""

import sys as _sys
import types as _types

__version__ = "0.1.0"

CAUTION = (
    "Results are tentative (putative) identifications, not confirmed identities. "
    "Confirmation needs an authentic reference standard run under the lab's own "
    "validated method; local regulations and accredited practice prevail."
)

#: Public names and the module each loads from on first use.
_LAZY = {
    "open_library": "matcher.api",
    "Library": "matcher.api",
    "calibrate": "matcher.api",
    "read_peaks": "matcher.api",
    "detect_peaks": "matcher.api",
    "screen": "matcher.api",
    "query": "matcher.api",
    "evaluate": "matcher.api",
    "spectrum_similarity": "matcher.api",
    "spectrum_similarity_matrix": "matcher.api",
    "Evaluation": "matcher.api",
    "TwoColumnEvaluation": "matcher.identify.evaluation_two_columns",
    "open_review": "matcher.api",
    "serve_review": "matcher.api",
    "MatcherError": "matcher.errors",
    "InputError": "matcher.errors",
    "LibraryError": "matcher.errors",
    "Calibration": "matcher.retention.calibration",
    "PeakTable": "matcher.io.peak_tables",
    "ScreenResult": "matcher.results",
    "QueryResult": "matcher.identify.query",
}

__all__ = ["__version__", "CAUTION", *_LAZY]


def __getattr__(name):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'matcher' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))


class _Package(_types.ModuleType):
    """The package module; a submodule named like a public function (``matcher/query.py``)
    does not replace that function when it is imported (use ``from matcher.identify.query import ...``
    to reach the module's own names)."""

    def __setattr__(self, name, value):
        if name in _LAZY and isinstance(value, _types.ModuleType):
            return
        super().__setattr__(name, value)


_sys.modules[__name__].__class__ = _Package
