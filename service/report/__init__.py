"""Reports of a check record and the figures they draw.

* :mod:`service.report.html`: the HTML report a reviewer reads (``render_report``,
  ``report_context``), shown standalone and inside the run page under ``/ui/``.
* :mod:`service.report.text`: the plain-text report of ``fluxproof check``.
* :mod:`service.report.layer_stack`, ``plot_profile``, ``plot_release``, ``plot_trend`` (with
  ``plot_common``): the SVG figures; :mod:`service.report.numbers`: numbers and units as people
  read them.

The browser pages (:mod:`service.ui`) import this package, never the reverse. The HTML names
below are loaded on first use, so that the text report imports on the base install, which has
neither Flask nor matplotlib.
"""

from __future__ import annotations

import importlib
from typing import Any

#: Names of :mod:`service.report.html` offered here, loaded when first asked for.
HTML_NAMES = frozenset({"DEFAULT_CAUTION", "QUANTITY_WORDS", "render_report", "report_context",
                        "stylesheet_text"})


def __getattr__(name: str) -> Any:
    if name in HTML_NAMES:
        return getattr(importlib.import_module("service.report.html"), name)
    raise AttributeError(f"module 'service.report' has no attribute {name!r}")


__all__ = sorted(HTML_NAMES)
