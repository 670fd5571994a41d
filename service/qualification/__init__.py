"""Qualification of an installation (``fluxproof qualify``): installation qualification (Python,
installed distributions, SHA-256 of the installed project files against the release manifest)
and operational qualification (published closed-form cases run here through ``check_case``),
reported as HTML, PDF and JSON with a summary an engineer signs."""
