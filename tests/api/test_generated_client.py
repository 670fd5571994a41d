"""A client generated from the served OpenAPI document works: openapi-python-client (a widely
used generator, run as a design tool would run it) builds a client with every operation and
model, and that client stores a case, queues a run, polls it and reads its record from a live
in-process server.

Generation that leaves anything out (the generator's warnings: a dropped endpoint, a schema it
cannot process) fails the test; so does a missing generator. The second test shows that the
check sees the two faults the document once had.
"""

from __future__ import annotations

import copy
import importlib
import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import httpx
import pytest

from service.server import BackgroundServer
from tests.api.support import make_case

PACKAGE = "fluxproof_generated_client"


def generate_client(document: dict[str, Any], directory: Path) -> tuple[bool, str]:
    """Run openapi-python-client on ``document``; (clean, generator output)."""
    spec_path = directory / "openapi.json"
    spec_path.write_text(json.dumps(document), encoding="utf-8")
    # The generator reads binary bodies only as octet-stream; the archival PDF is one (its
    # documented configuration option for a media type it does not know).
    config_path = directory / "generator.json"
    config_path.write_text(json.dumps(
        {"content_type_overrides": {"application/pdf": "application/octet-stream"}}),
        encoding="utf-8")
    bin_dir = str(Path(sys.executable).parent)
    generator = shutil.which("openapi-python-client", path=bin_dir) or shutil.which(
        "openapi-python-client")
    assert generator, "openapi-python-client is not installed (pip install -e '.[test]')"
    env = {**os.environ, "PATH": bin_dir + os.pathsep + os.environ.get("PATH", "")}
    finished = subprocess.run(
        [generator, "generate", "--path", str(spec_path), "--output-path",
         str(directory / PACKAGE), "--meta", "none", "--overwrite", "--config",
         str(config_path)],
        capture_output=True, text=True, env=env, timeout=300, check=False)
    output = finished.stdout + finished.stderr
    complete = ("WARNING" not in output and "Unable to process" not in output
                and "will not be generated" not in output)
    return finished.returncode == 0 and complete, output


@pytest.fixture
def live_server(app):
    with BackgroundServer(app) as server:
        yield server


def _wait_for_finished_record(get_run, client, run_id: str, timeout: float = 60.0):
    deadline = time.monotonic() + timeout
    while True:
        record = get_run.sync(run_id, client=client)
        if record.status.value in ("succeeded", "failed"):
            return record
        assert time.monotonic() < deadline, f"run {run_id} still {record.status.value}"
        time.sleep(0.05)


def test_generated_client_submits_polls_and_reads_a_case(live_server, tokens, tmp_path,
                                                         monkeypatch):
    document = httpx.get(f"{live_server.url}/v1/openapi.json").json()
    clean, output = generate_client(document, tmp_path)
    assert clean, output

    monkeypatch.syspath_prepend(str(tmp_path))
    client_module = importlib.import_module(f"{PACKAGE}.client")
    models = importlib.import_module(f"{PACKAGE}.models")
    create_case = importlib.import_module(f"{PACKAGE}.api.default.create_case")
    create_run = importlib.import_module(f"{PACKAGE}.api.default.create_run")
    get_run = importlib.import_module(f"{PACKAGE}.api.default.get_run")
    validate = importlib.import_module(f"{PACKAGE}.api.default.validate")

    client = client_module.AuthenticatedClient(base_url=live_server.url,
                                               token=tokens["engineer"])
    case = make_case(title="Generated client: planar membrane")
    body = models.Case.from_dict(case)

    normalised = validate.sync_detailed(client=client, body=body)
    assert normalised.status_code == 200
    assert json.loads(normalised.content)["geometry"] == "slab"

    created = create_case.sync(client=client, body=body)
    assert isinstance(created, models.CaseCreated), created
    accepted = create_run.sync(client=client,
                               body=models.RunRequest(case_id=created.case_id))
    assert isinstance(accepted, models.RunAccepted), accepted
    assert accepted.case_id == created.case_id

    record = _wait_for_finished_record(get_run, client, accepted.run_id)
    assert isinstance(record, models.Record)
    assert record.status.value == "succeeded", record.error
    assert record.case_sha256 == created.sha256
    assert record.submitted_by == "erin.engineer"
    served = httpx.get(f"{live_server.url}/v1/runs/{accepted.run_id}",
                       headers={"Authorization": f"Bearer {tokens['engineer']}"}).json()
    assert record.to_dict() == served  # the model holds every field that was sent

    inline = create_run.sync(client=client, body=models.RunRequest(case=models.Case.from_dict(
        make_case(title="Generated client: a case sent with its run"))))
    assert isinstance(inline, models.RunAccepted), inline
    assert _wait_for_finished_record(get_run, client, inline.run_id).status.value == "succeeded"

    refused = create_run.sync_detailed(client=client, body=models.RunRequest(case_id="nope"))
    assert refused.status_code == 422
    assert isinstance(refused.parsed, models.Problem)
    assert [error.path for error in refused.parsed.errors] == ["case_id"]


def test_the_generation_check_sees_a_property_reference_and_an_object_default(client,
                                                                              tmp_path):
    served = client.get("/v1/openapi.json").get_json()
    components = served["components"]["schemas"]

    pointer = copy.deepcopy(served)
    pointer["components"]["schemas"]["Record"]["properties"]["run_id"] = {
        "$ref": "#/components/schemas/RunSummary/properties/run_id"}
    (tmp_path / "pointer").mkdir()
    clean, output = generate_client(pointer, tmp_path / "pointer")
    assert not clean and "Record" in output

    defaulted = copy.deepcopy(served)
    reaction = defaulted["components"]["schemas"]["Layer"]["properties"]["reaction"]
    assert "default" not in components["Layer"]["properties"]["reaction"]
    reaction["default"] = {"kind": "none"}
    (tmp_path / "default").mkdir()
    clean, output = generate_client(defaulted, tmp_path / "default")
    assert not clean and "Layer" in output
