"""Reports of a check record and the figures they draw.

* :mod:`service.report.html`: the HTML report a reviewer reads (``render_report``,
  ``report_context``), shown standalone and inside the run page under ``/ui/``.
* :mod:`service.report.text`: the plain-text report of ``fluxproof check``.
* :mod:`service.report.design_view`: what every rendering says about the design (the two
  verdicts apart, requirement rows, the uncertainty, limit and sweep blocks), rendered by
  :mod:`service.report.text_design` and :mod:`service.report.html_design` (figures in
  ``plot_design``); :mod:`service.report.readable`: SI values in a readable unit.
* :mod:`service.report.layer_stack`, ``plot_profile``, ``plot_release``, ``plot_trend`` (with
  ``plot_common``): the SVG figures; :mod:`service.report.numbers`: numbers and units as people
  read them.

The browser pages (:mod:`service.ui`) import this package, never the reverse. The package
itself imports nothing, so that the text report imports on the base install, which has neither
Flask nor matplotlib: import the HTML names from :mod:`service.report.html`.
"""
