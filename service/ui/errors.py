"""Errors on the browser pages: an HTML page with the status, the reason and the way on."""

from __future__ import annotations

from flask import render_template
from werkzeug.exceptions import HTTPException

from service.errors import ProblemError
from service.ui.blueprint import ui


@ui.errorhandler(ProblemError)
def problem_page(error: ProblemError):
    return render_template("ui_error.html", status=error.status, title=error.title,
                           detail=error.detail, errors=error.errors), error.status


@ui.errorhandler(HTTPException)
def http_error_page(error: HTTPException):
    status = error.code or 500
    return render_template("ui_error.html", status=status, title=error.name,
                           detail=error.description, errors=[]), status
