"""The HTTP API and the page, through FastAPI's test client: every endpoint and every bad input (#15)."""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import html5lib
import pytest
from fastapi.testclient import TestClient

from trimtab.app import Explorer
from trimtab.app._server import MAX_BODY, create_app


@pytest.fixture(scope="module")
def client(explorer: Explorer) -> TestClient:
    return local_client(create_app(explorer))


def local_client(application, port: int = 8765) -> TestClient:  # type: ignore[no-untyped-def]
    """A client that names this server in its Host and carries the run's token, as the page does."""
    return TestClient(application, base_url=f"http://127.0.0.1:{port}", headers={"X-Trimtab-Token": application.state.token})


def test_the_page_is_valid_html_with_its_assets_and_the_caution(client: TestClient) -> None:
    response = client.get("/")
    assert response.status_code == 200
    assert "default-src 'self'" in response.headers["content-security-policy"]
    html5lib.HTMLParser(strict=True).parse(response.text)
    assert "not investment advice" in response.text and "compliance" in response.text
    assert '<script src="/static/explore.js">' in response.text and "http" not in response.text.split("<body>")[1].replace("http-equiv", "")
    for name, kind in (("explore.js", "javascript"), ("explore.css", "css")):
        asset = client.get(f"/static/{name}")
        assert asset.status_code == 200 and kind in asset.headers["content-type"]


@pytest.mark.parametrize("path", ["/static/../_server.py", "/static/%2e%2e/_server.py", "/static/_server.py",
                                  "/static/..%2F..%2Fcli.py", "/static/", "/etc/passwd", "/static/explore.js/x"])
def test_no_file_outside_the_assets_is_served(client: TestClient, path: str) -> None:
    response = client.get(path)
    assert response.status_code == 404
    assert "import" not in response.text


def test_scenario_lists_each_limit_with_its_key_path_and_value(client: TestClient) -> None:
    body = client.get("/api/scenario").json()
    assert body["scenario"] == "base"
    limits = {item["key"]: item for item in body["limits"]}
    assert limits["tracking_error.max"]["value"] == pytest.approx(0.03)
    assert limits["factor_exposure.bounds.momentum.1"]["optional"] is True


def test_solve_returns_the_result_json_document(client: TestClient, demo_folder: Path) -> None:
    response = client.post("/api/solve", json={"limits": {"tracking_error.max": 0.02}})
    assert response.status_code == 200
    document = response.json()
    assert document["document"] == "trimtab.report" and document["kind"] == "rebalance"
    assert document["risk_budget"]["cap"] == pytest.approx(0.02)
    assert document["risk_budget"]["post"] <= 0.02 + 1e-6
    # the same layout as result.json written by `trimtab rebalance`
    from trimtab.report import JSON_SCHEMA
    import jsonschema

    jsonschema.validate(document, JSON_SCHEMA)


def test_solve_carries_the_scenario_runs_warnings_and_context(client: TestClient, demo_folder: Path) -> None:
    # issue #13: zeroed alpha, dropped assets and the NAV/cash context reach the page as they reach
    # result.json; both go through the scenario run's one context step
    from trimtab.report import report_document
    from trimtab.scenario import load_inputs, load_scenario
    from trimtab.scenario._run import solve

    written = report_document(solve(load_inputs(load_scenario(demo_folder / "base.yaml"))).result)
    document = client.post("/api/solve", json={"limits": {}}).json()
    assert [w["kind"] for w in document["warnings"]] == [w["kind"] for w in written["warnings"]]
    assert document["context"] == written["context"]


def test_infeasible_limits_give_the_infeasibility_document(client: TestClient) -> None:
    response = client.post("/api/solve", json={"limits": {"tracking_error.max": 0.002, "turnover.max": 0.01}})
    assert response.status_code == 200
    document = response.json()
    assert document["kind"] == "infeasible"
    # the limits moved are among the conflicting ones (by name, or by key path once conflict sets name them so)
    assert document["relaxation"] and any(
        "turnover" in row["constraint"] or "tracking_error" in row["constraint"] for row in document["relaxation"])


def test_the_page_solve_shows_the_relaxation_not_an_error(client: TestClient) -> None:
    view = client.post("/page/solve", json={"limits": {"tracking_error.max": 0.002, "turnover.max": 0.01}}).json()
    assert view["status"] == "infeasible"
    assert '<table class="relaxation">' in view["html"]["relaxation"] and "Infeasible" in view["html"]["relaxation"]
    # one sentence per conflicting limit (issue #19)
    assert '<ul class="reasons">' in view["html"]["relaxation"] and "constraints.tracking_error.max: " in view["html"]["relaxation"]
    solved = client.post("/page/solve", json={"limits": {"tracking_error.max": 0.02}}).json()
    assert solved["figures"]["tracking_error"] == pytest.approx(0.02, abs=1e-4)  # the rounded book, costs paid from cash: within the risk rounding tolerance (#19)
    assert set(solved["html"]) == {"verdict", "headline", "exposures", "trades", "binding", "warnings", "stress", "overlay"}
    assert solved["status"] == "solved" and solved["html"]["verdict"] == "" and solved["breached"] == []
    assert solved["seconds"]["solve"] > 0 and solved["seconds"]["render"] > 0


@pytest.mark.parametrize(
    ("body", "status", "message"),
    [
        ({"limits": {"tracking_error.mx": 0.02}}, 422, "limits.tracking_error.mx: not a limit of this scenario (did you mean tracking_error.max?)"),
        ({"limits": {"tracking_error.max": -0.02}}, 422, "constraints.tracking_error.max: must be ≥ 0 (got -0.02)"),
        ({"limits": {"tracking_error.max": "abc"}}, 422, 'limits.tracking_error.max: expected a JSON number, got "abc"'),
        ({"limits": {"tracking_error.max": None}}, 422, "limits.tracking_error.max: a number is required, got null"),
        ({"limits": {"weight.max": 1e300}}, 422, "limits.weight.max: expected a finite number within ±1e+06, got 1e+300"),
        ({"limits": [1, 2]}, 422, "limits: Input should be a valid dictionary"),
        ({"limit": {}}, 422, "limit: unknown key (expected limits, risk_aversion)"),
        ({"risk_aversion": 2.0}, 422, "limits.risk_aversion: not a limit of this scenario (GET /api/scenario lists its limits)"),
    ],
    ids=["unknown-key", "negative-cap", "text", "null", "huge", "list", "extra-key", "no-risk-aversion"],
)
def test_a_bad_key_or_value_gets_one_clear_message(client: TestClient, body: dict, status: int, message: str) -> None:
    response = client.post("/api/solve", json=body)
    assert response.status_code == status
    assert response.json() == {"detail": message}


@pytest.mark.parametrize(
    ("content", "headers", "status", "message"),
    [
        ('{"limits": {"tracking_error.max": NaN}}', {"content-type": "application/json"}, 422, "limits.tracking_error.max: Input should be a finite number (got nan)"),
        ('{"limits": ', {"content-type": "application/json"}, 422, "the body is not valid JSON"),
        ('{"limits": {}}', {"content-type": "text/plain"}, 415, "send the body as JSON (Content-Type: application/json)"),
        ('{"limits": {}}', {"content-type": "application/json", "origin": "http://elsewhere.example"}, 403, "requests from http://elsewhere.example are not accepted"),
        ('{"limits": {}}', {"content-type": "application/json", "origin": "https://127.0.0.1:8765"}, 403, "requests from https://127.0.0.1:8765 are not accepted"),
        ("x" * (MAX_BODY + 1), {"content-type": "application/json"}, 413, "request body over 64 KiB"),
    ],
    ids=["nan", "broken-json", "not-json", "other-origin", "origin-other-scheme", "too-large"],
)
def test_malformed_requests_are_refused(client: TestClient, content: str, headers: dict, status: int, message: str) -> None:
    response = client.post("/api/solve", content=content, headers=headers)
    assert response.status_code == status
    assert response.json() == {"detail": message}


def test_a_streamed_body_over_the_limit_is_refused(client: TestClient) -> None:
    def chunks():  # type: ignore[no-untyped-def]
        for _ in range(5):
            yield b" " * (MAX_BODY // 4)

    response = client.post("/api/solve", content=chunks(), headers={"content-type": "application/json"})
    assert response.status_code == 413


def test_concurrent_solves_queue_and_give_consistent_documents(client: TestClient) -> None:
    caps = [0.015, 0.025] * 4

    def one(cap: float) -> tuple[float, float]:
        document = client.post("/api/solve", json={"limits": {"tracking_error.max": cap}}).json()
        return document["risk_budget"]["cap"], document["risk_budget"]["post"]

    with ThreadPoolExecutor(max_workers=4) as pool:
        answers = list(pool.map(one, caps))
    for cap, (seen_cap, post) in zip(caps, answers, strict=True):
        assert seen_cap == pytest.approx(cap)
        assert post == pytest.approx(cap, abs=1e-4)  # the cap binds (to the rounding tolerance): each answer is its own request's


def test_save_writes_a_new_scenario_once(client: TestClient, demo_folder: Path) -> None:
    response = client.post("/api/save", json={"name": "api_saved", "limits": {"turnover.max": 0.2}})
    assert response.status_code == 201
    path = Path(response.json()["file"])
    assert path == demo_folder / "api_saved.yaml" and "turnover: {max: 0.2}" in path.read_text(encoding="utf-8")
    again = client.post("/api/save", json={"name": "api_saved", "limits": {}})
    assert again.status_code == 409 and again.json() == {"detail": "name: api_saved.yaml already exists beside the scenario; choose another name"}
    bad = client.post("/api/save", json={"name": "../x", "limits": {}})
    assert bad.status_code == 422 and bad.json()["detail"].startswith("name: use letters, digits")
    missing = client.post("/api/save", json={"limits": {}})
    assert missing.status_code == 422 and missing.json()["detail"] == "name: Field required"
    path.unlink()


def test_nothing_is_written_but_what_save_asks_for(client: TestClient, demo_folder: Path) -> None:
    before = {p: p.stat().st_mtime_ns for p in demo_folder.rglob("*")}
    client.post("/api/solve", json={"limits": {"tracking_error.max": 0.021}})
    client.post("/page/solve", json={"limits": {"factor_exposure.bounds.momentum.1": 0.1}})
    client.get("/")
    assert {p: p.stat().st_mtime_ns for p in demo_folder.rglob("*")} == before


def test_the_openapi_schema_documents_the_api(client: TestClient) -> None:
    schema = client.get("/openapi.json").json()
    assert set(schema["paths"]) == {"/api/scenario", "/api/solve", "/api/save"}
    assert schema["components"]["schemas"]["SolveRequest"]["additionalProperties"] is False
    shipped = Path(__file__).parents[2] / "docs" / "openapi.json"
    copy = json.loads(shipped.read_text(encoding="utf-8"))
    assert set(copy["paths"]) == set(schema["paths"]), "regenerate docs/openapi.json (docs/api.md says how)"
    for model in ("SolveRequest", "SaveRequest", "ScenarioInfo", "LimitInfo", "Saved"):
        assert copy["components"]["schemas"][model] == schema["components"]["schemas"][model]


def test_text_from_the_scenario_cannot_break_out_of_the_page(demo_folder: Path, tmp_path: Path) -> None:
    hostile = demo_folder / "hostile_description.yaml"
    hostile.write_text('extends: base.yaml\ndescription: "</script><script>alert(1)</script><b>x</b>"\n', encoding="utf-8")
    try:
        page = local_client(create_app(Explorer.open(hostile))).get("/").text
    finally:
        hostile.unlink()
    assert "<script>alert(1)" not in page and "<b>x</b>" not in page
    assert "&lt;b&gt;x&lt;/b&gt;" in page  # shown as text in the header
    html5lib.HTMLParser(strict=True).parse(page)


def test_the_page_shows_the_stress_table_the_report_computes(client: TestClient, explorer: Explorer) -> None:
    # the demo's base.yaml runs every shock of shocks.yaml before and after the trade: the page shows
    # the same figures as result.json's stress records, formatted as the report formats them
    from trimtab._format import format_percent

    page = client.get("/").text
    assert "Stress (before → after)" in page and '<div id="stress-box" hidden>' not in page
    document = client.post("/api/solve", json={"limits": {"tracking_error.max": 0.02}}).json()
    view = client.post("/page/solve", json={"limits": {"tracking_error.max": 0.02}}).json()
    table = html5lib.parseFragment(view["html"]["stress"], namespaceHTMLElements=False).find("table")
    rows = table.findall("tbody/tr")
    assert document["stress"] and len(rows) == len(document["stress"])
    for record, row in zip(document["stress"], rows):
        cells = [row.find("th").text] + [td.text for td in row.findall("td")]
        assert cells[0] == record["shock"]
        assert cells[1:3] == [format_percent(record["pre_active"]), format_percent(record["post_active"])]
