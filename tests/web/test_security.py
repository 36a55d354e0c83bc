"""The local server's guards: Host (DNS rebinding), same-origin writes, body cap, headers."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from web_helpers import BASE_URL, project_count

from probewise.web.app import create_app
from probewise.web.security import allowed_hosts_for, split_host_port


@pytest.mark.parametrize("host", ["evil.example", "evil.example:8000", "127.0.0.1.evil.example"])
def test_foreign_host_header_is_refused(client, host):
    for path in ("/", "/api/projects", "/static/css/probewise.css"):
        answer = client.get(path, headers={"Host": host})
        assert answer.status_code == 400, (host, path)
        assert answer.headers["x-frame-options"] == "DENY"


def test_foreign_host_on_the_api_gets_a_json_detail(client):
    answer = client.get("/api/projects", headers={"Host": "evil.example"})
    assert answer.status_code == 400
    assert "evil.example" in answer.json()["detail"]


@pytest.mark.parametrize(
    "host", ["127.0.0.1", "127.0.0.1:8000", "localhost:8000", "LOCALHOST", "[::1]:8000", "[::1]"]
)
def test_own_host_names_are_accepted(client, host):
    assert client.get("/", headers={"Host": host}).status_code == 200


def test_default_testserver_host_is_refused_unless_added(db_path):
    with TestClient(create_app(db_path)) as plain:
        assert plain.get("/").status_code == 400
    with TestClient(create_app(db_path, extra_hosts=["testserver"])) as allowed:
        assert allowed.get("/").status_code == 200


def test_bound_host_is_accepted(db_path):
    app = create_app(db_path, bound_host="192.168.1.20")
    with TestClient(app, base_url="http://192.168.1.20:8000") as lan:
        assert lan.get("/").status_code == 200
        assert lan.get("/", headers={"Host": "192.168.1.21:8000"}).status_code == 400


@pytest.mark.parametrize(
    "origin",
    [
        "http://evil.example",
        "http://127.0.0.1.evil.example",
        "null",
        "http://127.0.0.1:9999",  # same host, another port: another origin
        "file://",
    ],
)
def test_cross_origin_writes_are_refused(client, origin):
    before = project_count(client)
    answer = client.post("/projects/1/duplicate", headers={"Origin": origin})
    assert answer.status_code == 403
    answer = client.post("/api/projects/1/duplicate", headers={"Origin": origin})
    assert answer.status_code == 403
    assert "cross-origin" in answer.json()["detail"]
    assert client.delete("/api/projects/1", headers={"Origin": origin}).status_code == 403
    assert project_count(client) == before


def test_cross_origin_referer_is_refused_when_origin_is_absent(client):
    before = project_count(client)
    answer = client.post(
        "/projects/1/duplicate", headers={"Referer": "http://evil.example/page.html"}
    )
    assert answer.status_code == 403
    assert project_count(client) == before


def test_same_origin_writes_pass(client):
    answer = client.post(
        "/api/projects/1/duplicate",
        headers={"Origin": BASE_URL, "Referer": f"{BASE_URL}/projects/1"},
    )
    assert answer.status_code == 201
    answer = client.post(
        "/api/projects/1/duplicate",
        headers={"Host": "localhost:8000", "Origin": "http://localhost:8000"},
    )
    assert answer.status_code == 201
    # A client that names no origin at all (a script, curl) is not a browser form: allowed.
    assert client.post("/api/projects/1/duplicate").status_code == 201


def test_reads_are_not_origin_checked(client):
    assert client.get("/", headers={"Origin": "http://evil.example"}).status_code == 200


def test_body_over_the_cap_is_refused(db_path, tiny_model):
    app = create_app(db_path, seed=False, max_body_bytes=1000)
    with TestClient(app, base_url=BASE_URL) as small:
        answer = small.post("/api/projects", content=b"{" + b" " * 2000 + b"}")
        assert answer.status_code == 413
        assert "limit" in answer.json()["detail"]
        # Without a Content-Length (chunked), the cap is counted as the body streams in.
        chunks = iter([b"{" + b" " * 700, b" " * 700 + b"}"])
        answer = small.post(
            "/api/projects", content=chunks, headers={"Content-Type": "application/json"}
        )
        assert answer.status_code == 413
        answer = small.post(
            "/projects/import", files={"model_file": ("m.json", b"x" * 5000, "application/json")}
        )
        assert answer.status_code == 413
        assert "1000 byte limit" in answer.text
        # From the page (htmx), the message goes to the flash area, not into the list.
        answer = small.post(
            "/projects/import",
            files={"model_file": ("m.json", b"x" * 5000, "application/json")},
            headers={"HX-Request": "true"},
        )
        assert answer.status_code == 413
        assert answer.headers["hx-retarget"] == "#flash"
        assert project_count(small) == 0


def test_security_headers_on_every_kind_of_answer(client):
    for answer in (
        client.get("/"),
        client.get("/api/projects"),
        client.get("/static/css/probewise.css"),
        client.get("/nowhere"),
        client.get("/", headers={"Host": "evil.example"}),
    ):
        assert answer.headers["x-content-type-options"] == "nosniff"
        assert answer.headers["x-frame-options"] == "DENY"
        assert answer.headers["referrer-policy"] == "same-origin"
        csp = answer.headers["content-security-policy"]
        assert "script-src 'self'" in csp and "style-src 'self'" in csp
        assert "img-src 'self' data:" in csp
        assert "unsafe-inline" not in csp and "unsafe-eval" not in csp


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ("localhost", ("localhost", None)),
        ("LocalHost:8000", ("localhost", 8000)),
        ("[::1]:80", ("[::1]", 80)),
        ("[::1]", ("[::1]", None)),
        ("127.0.0.1:1", ("127.0.0.1", 1)),
    ],
)
def test_split_host_port(value, expected):
    assert split_host_port(value) == expected


@pytest.mark.parametrize("value", ["[::1", "host:port", "[::1]x"])
def test_split_host_port_rejects_junk(value):
    with pytest.raises(ValueError):
        split_host_port(value)


def test_allowed_hosts_always_include_loopback():
    hosts = allowed_hosts_for("::1", ["My-Laptop"])
    assert {"localhost", "127.0.0.1", "[::1]", "my-laptop"} <= hosts
