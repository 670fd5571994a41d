"""Signing in with a token, and out."""

from __future__ import annotations

from flask import flash, g, redirect, render_template, request, url_for

from service.ui import signin
from service.ui.blueprint import ui


@ui.get("/")
def index():
    return redirect(url_for("ui.runs"), code=303)


@ui.get("/login")
def login():
    return render_template("ui_login.html", next=signin.safe_next(request.args.get("next")),
                           error=None)


@ui.post("/login")
def login_submit():
    token = request.form.get("token", "")
    target = signin.safe_next(request.form.get("next"))
    if not token.strip():
        return render_template("ui_login.html", next=target,
                               error="token: paste the access token you were given "
                                     "(it begins with fpt_)."), 422
    person = signin.sign_in(token)
    if person is None:
        return render_template("ui_login.html", next=target,
                               error="token: this token is unknown, malformed or revoked."), 401
    g.person = person
    flash(f"Signed in as {person.name} ({person.role}).", "ok")
    return redirect(target, code=303)


@ui.post("/logout")
def logout():
    signin.sign_out()
    flash("Signed out.", "ok")
    return redirect(url_for("ui.login"), code=303)
