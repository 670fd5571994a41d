"""``Client``: the HTTP client that design tools use to talk to a fluxproof service.

>>> client = Client("http://127.0.0.1:8000", token)       # doctest: +SKIP
>>> record = client.wait(client.submit(case), timeout=60)  # doctest: +SKIP

Every error response raises :class:`ApiError`, which carries the problem document.
"""

from __future__ import annotations

import time
from typing import Any

import requests

from schemas.result import RunStatus

DEFAULT_TIMEOUT_S = 30.0
FINISHED = (RunStatus.SUCCEEDED.value, RunStatus.FAILED.value)


class ApiError(Exception):
    """An error response: ``status`` and the RFC 9457 ``problem`` document (with ``errors``)."""

    def __init__(self, status: int, problem: dict[str, Any]) -> None:
        self.status = status
        self.problem = problem
        self.errors = list(problem.get("errors") or [])
        detail = problem.get("detail") or problem.get("title") or "request failed"
        fields = "; ".join(f"{e.get('path') or '(body)'}: {e.get('message')}"
                           for e in self.errors)
        super().__init__(f"HTTP {status}: {detail}" + (f" [{fields}]" if fields else ""))


class Client:
    """A client of one fluxproof service, authenticated with one bearer token.

    Parameters
    ----------
    base_url
        The service's root, e.g. ``http://127.0.0.1:8000`` (``/v1`` is added).
    token
        A bearer token (``fluxproof token create``).
    timeout
        Seconds to wait for each HTTP response.
    """

    def __init__(self, base_url: str, token: str, *, timeout: float = DEFAULT_TIMEOUT_S,
                 session: requests.Session | None = None) -> None:
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout
        self._session = session or requests.Session()
        self._session.headers["Authorization"] = f"Bearer {token}"

    def close(self) -> None:
        self._session.close()

    def __enter__(self) -> Client:
        return self

    def __exit__(self, *_exc: Any) -> None:
        self.close()

    def _request(self, method: str, path: str, **kwargs: Any) -> requests.Response:
        response = self._session.request(method, f"{self.base_url}/v1{path}",
                                         timeout=self.timeout, **kwargs)
        if response.status_code >= 400:
            try:
                problem = response.json()
            except ValueError:
                problem = {"status": response.status_code, "detail": response.text[:500]}
            raise ApiError(response.status_code, problem)
        return response

    def _json(self, method: str, path: str, **kwargs: Any) -> Any:
        return self._request(method, path, **kwargs).json()

    def health(self) -> dict[str, Any]:
        return self._json("GET", "/health")

    def validate(self, case: dict[str, Any]) -> dict[str, Any]:
        """The case normalised to SI; ApiError (422) names every invalid field."""
        return self._json("POST", "/validate", json=case)

    def store_case(self, case: dict[str, Any]) -> dict[str, Any]:
        """Store a case; returns ``{case_id, sha256}`` (the same id for the same content)."""
        return self._json("POST", "/cases", json=case)

    def submit(self, case: dict[str, Any]) -> str:
        """Queue a check of ``case``; returns the run id."""
        return self._json("POST", "/runs", json={"case": case})["run_id"]

    def submit_stored(self, case_id: str) -> str:
        """Queue a check of a stored case; returns the run id."""
        return self._json("POST", "/runs", json={"case_id": case_id})["run_id"]

    def get_run(self, run_id: str) -> dict[str, Any]:
        return self._json("GET", f"/runs/{run_id}")

    def wait(self, run_id: str, timeout: float = 60.0, *, first_interval: float = 0.05,
             max_interval: float = 2.0) -> dict[str, Any]:
        """Poll until the run finishes, with growing intervals; returns the record.

        Raises TimeoutError when the run is still unfinished after ``timeout`` seconds.
        """
        deadline = time.monotonic() + timeout
        interval = first_interval
        while True:
            record = self.get_run(run_id)
            if record["status"] in FINISHED:
                return record
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                raise TimeoutError(f"run {run_id} is still {record['status']} after "
                                   f"{timeout} s")
            time.sleep(min(interval, remaining))
            interval = min(interval * 2, max_interval)

    def report(self, run_id: str) -> str:
        """The HTML report of a run."""
        return self._request("GET", f"/runs/{run_id}/report").text

    def signoff(self, run_id: str, decision: str, comment: str, *, password: str,
                meaning: str = "approval", justification: str | None = None) -> dict[str, Any]:
        """Sign a reviewer's decision (``approved`` or ``rejected``) on a succeeded run, with
        its meaning (review, approval, responsibility) and the reviewer's password again."""
        body = {"decision": decision, "comment": comment, "meaning": meaning,
                "password": password}
        if justification is not None:
            body["justification"] = justification
        return self._json("POST", f"/runs/{run_id}/signoffs", json=body)

    def start_batch(self, *, tag: str | None = None, all_cases: bool = False) -> str:
        """Re-verify stored cases (those with ``tag``, or all); returns the batch id."""
        body: dict[str, Any] = {"tag": tag} if tag is not None else {}
        if all_cases:
            body["all"] = True
        return self._json("POST", "/batches", json=body)["batch_id"]

    def get_batch(self, batch_id: str) -> dict[str, Any]:
        return self._json("GET", f"/batches/{batch_id}")

    def audit(self, *, limit: int = 100, offset: int = 0) -> dict[str, Any]:
        return self._json("GET", "/audit", params={"limit": limit, "offset": offset})

    def verify_audit(self) -> dict[str, Any]:
        return self._json("GET", "/audit/verify")
