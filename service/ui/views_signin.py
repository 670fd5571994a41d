"""Signing in with login and password, and out."""

from __future__ import annotations

from typing import Any

from flask import current_app, flash, g, redirect, render_template, request, url_for

from service.ui import signin
from service.ui.blueprint import ui


@ui.get("/")
def index():
    return redirect(url_for("ui.runs"), code=303)


def _login_page(status: int = 200, **context: Any):
    config = current_app.config
    return render_template("ui_login.html", idle_minutes=config.get("SESSION_IDLE_MINUTES"),
                           max_hours=config.get("SESSION_MAX_HOURS"),
                           **{"error": None, "login": "", **context}), status


@ui.get("/login")
def login():
    return _login_page(next=signin.safe_next(request.args.get("next")))


@ui.post("/login")
def login_submit():
    login_name = request.form.get("login", "")
    password = request.form.get("password", "")
    target = signin.safe_next(request.form.get("next"))
    if not login_name.strip() or not password:
        return _login_page(422, next=target, login=login_name,
                           error="login, password: give both your login and your password.")
    person = signin.sign_in(login_name, password)
    if person is None:
        return _login_page(401, next=target, login=login_name,
                           error="login, password: these do not match an active account.")
    g.person = person
    flash(f"Signed in as {person.name} ({person.role}).", "ok")
    return redirect(target, code=303)


@ui.post("/logout")
def logout():
    signin.sign_out()
    flash("Signed out.", "ok")
    return redirect(url_for("ui.login"), code=303)
