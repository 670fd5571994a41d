"""The qualification report: one document (JSON), and the same as HTML and PDF, each with a
summary an engineer signs (printed name, signature, date) for execution and for review."""

from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from jinja2 import Environment, PackageLoader, select_autoescape

from service.qualification.installation import InstallationResult
from service.qualification.operational import CaseResult
from service.report.numbers import plain_number, unit_text
from service.report.pdf_document import PagedDocument

FORMAT = 1
SIGNERS = ("Performed by (engineer qualifying this installation)",
           "Reviewed and approved by")
STATEMENT = ("Installation qualification checks that the Python interpreter, the installed "
             "distributions and every installed file of fluxproof are those of the release "
             "(SHA-256 against its manifest). Operational qualification runs cases with "
             "published closed-form answers through the installed engine and compares each "
             "figure with its source within the stated tolerance. A pass supports, but does not "
             "replace, the user's own validation for the intended use.")
FILES = {"json": "qualification.json", "html": "qualification.html", "pdf": "qualification.pdf"}


def build_document(installation: InstallationResult, operation: list[CaseResult],
                   *, when: datetime | None = None) -> dict[str, Any]:
    """The report as one JSON-ready document."""
    when = when or datetime.now(UTC)
    passed_cases = sum(1 for r in operation if r.passed)
    failures = installation.failures() + [f"{r.id}: {r.reason}" for r in operation
                                          if not r.passed]
    return {
        "format": FORMAT,
        "tool": "fluxproof",
        "version": installation.project_version,
        "generated_at": when.isoformat(timespec="seconds"),
        "passed": installation.passed and all(r.passed for r in operation),
        "summary": {
            "installation": "pass" if installation.passed else "FAIL",
            "operation": "pass" if operation and passed_cases == len(operation) else "FAIL",
            "cases_passed": passed_cases,
            "cases": len(operation),
            "files_checked": installation.files_checked,
            "files_differing": len(installation.file_differences),
            "failures": failures,
        },
        "statement": STATEMENT,
        "installation": installation.as_dict(),
        "operation": [r.as_dict() for r in operation],
        "signatures": [{"role": role, "printed_name": None, "signature": None, "date": None}
                       for role in SIGNERS],
    }


def _number(value: Any) -> str:
    return "—" if value is None else plain_number(value, 8)


def render_html(document: dict[str, Any]) -> str:
    env = Environment(loader=PackageLoader("service", "templates"),
                      autoescape=select_autoescape(["html"]))
    env.filters["number"] = _number
    return env.get_template("qualification.html").render(q=document)


def _header(document: dict[str, Any]) -> list[str]:
    return [f"fluxproof qualification report · version {document['version']}",
            f"generated {document['generated_at']} · result "
            f"{'PASS' if document['passed'] else 'FAIL'}"]


def render_pdf(document: dict[str, Any]) -> bytes:
    pdf = PagedDocument(title="fluxproof qualification report", header_lines=_header(document))
    summary = document["summary"]
    pdf.title_block("Qualification of this fluxproof installation", document["statement"])
    pdf.heading("Summary")
    verdict = "PASS" if document["passed"] else "FAIL"
    pdf.paragraph(f"{'✓' if document['passed'] else '✗'} Overall result: {verdict}", bold=True)
    installation = document["installation"]
    pdf.data_table(("part", "result", "detail"), [
        ("Installation qualification", summary["installation"],
         f"Python {installation['python']}; {summary['files_checked']} files hashed, "
         f"{summary['files_differing']} differ from the manifest"),
        ("Operational qualification", summary["operation"],
         f"{summary['cases_passed']} of {summary['cases']} published-reference cases pass"),
    ], (45, 20, 115))
    if summary["failures"]:
        pdf.paragraph("What differs:", bold=True)
        pdf.bullets(summary["failures"])
    pdf.signature_lines(SIGNERS)

    pdf.heading("Installation qualification")
    pdf.paragraph(f"Platform: {installation['platform']}")
    pdf.paragraph(f"Release manifest SHA-256: {installation['manifest_sha256'] or '—'}")
    pdf.data_table(("check", "expected", "found", "result"),
                   [(i["name"], i["expected"], i["found"], "✓ pass" if i["passed"] else "✗ FAIL")
                    for i in installation["items"]], (55, 50, 50, 25))
    if installation["file_differences"]:
        pdf.data_table(("file", "difference", "manifest SHA-256", "installed SHA-256"),
                       [(d["path"], d["kind"], d["expected"] or "—", d["found"] or "—")
                        for d in installation["file_differences"]], (50, 20, 55, 55))
    else:
        pdf.paragraph(f"All {installation['files_checked']} installed files match the "
                      "release manifest (SHA-256).")

    pdf.heading("Operational qualification")
    pdf.data_table(
        ("case", "what it covers", "figure", "published", "result", "rel. error",
         "tolerance", "pass"),
        [(r["id"], f"{r['title']} ({', '.join(r['covers'].values())})", r["quantity"],
          f"{_number(r['expected'])} {unit_text(r['unit'])}", _number(r["result"]),
          plain_number(r["relative_error"], 2) if r["relative_error"] is not None else "—",
          f"{r['tolerance']:g}", "✓ pass" if r["passed"] else "✗ FAIL")
         for r in document["operation"]],
        (13, 47, 25, 27, 22, 15, 14, 17))
    pdf.heading("Sources, formulas and tolerances")
    for r in document["operation"]:
        pdf.paragraph(f"{r['id']}: {r['title']}", bold=True)
        pdf.paragraph(f"Source: {r['source']}")
        pdf.paragraph(f"Formula: {r['formula']}")
        pdf.paragraph(f"Tolerance {r['tolerance']:g} relative: {r['tolerance_reason']}")
        pdf.paragraph(f"Result: {r['reason']}")
    pdf.heading("Installed distributions")
    pdf.data_table(("distribution", "version"), list(installation["distributions"].items()),
                   (90, 90))
    return pdf.finish()


def write_reports(document: dict[str, Any], directory: Path) -> dict[str, Path]:
    """Write the JSON, HTML and PDF reports into ``directory``; their paths by format."""
    directory.mkdir(parents=True, exist_ok=True)
    paths = {kind: directory / name for kind, name in FILES.items()}
    paths["json"].write_text(json.dumps(document, indent=2, ensure_ascii=False) + "\n",
                             encoding="utf-8")
    paths["html"].write_text(render_html(document), encoding="utf-8")
    paths["pdf"].write_bytes(render_pdf(document))
    return paths
