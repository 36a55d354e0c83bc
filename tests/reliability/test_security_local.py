"""Security of a server that runs on the engineer's own machine, beyond tests/web/
test_security.py (which covers the Host check on reads, cross-origin refusals on the
projects list, the body cap and the response headers):

- uploaded archives cannot write outside their scratch folder (``..``, absolute paths,
  drive letters, backslashes, symbolic links), through geo_io and through the Site page's
  GIS import;
- names holding markup render as text on every page and fragment (autoescaping), with no
  way to break out of an attribute;
- the Host check (DNS rebinding) and the same-origin check also guard every state-changing
  route of the model-editing pages, the optimiser and the API, and nothing is stored;
- ``probewise serve`` listens on 127.0.0.1 unless told otherwise.
"""

from __future__ import annotations

import io
import json
import socket
import stat
import uuid
import zipfile
from pathlib import Path

import httpx
import pytest
from corpus import TINY, UNIT_FORM
from fastapi.testclient import TestClient
from reliability_helpers import BASE_URL, free_port, links_of, served, store_snapshot

from probewise.errors import InputError
from probewise.io.gis_files import extract_zip as _extract_zip
from probewise.web.app import create_app

# ---------------------------------------------------------------- archives


def zip_of(members: dict[str, bytes], links: dict[str, str] | None = None) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, content in members.items():
            zf.writestr(name, content)
        for name, target in (links or {}).items():
            info = zipfile.ZipInfo(name)
            info.external_attr = (stat.S_IFLNK | 0o777) << 16
            zf.writestr(info, target)
    return buf.getvalue()


@pytest.mark.parametrize(
    ("member", "words"),
    [
        ("../escaped.shp", "escaping the folder"),
        ("../../escaped.shp", "escaping the folder"),
        ("inner/../../escaped.shp", "escaping the folder"),
        ("..\\..\\escaped.shp", "escaping the folder"),
        ("/tmp/escaped.shp", "absolute path"),
        ("C:/escaped.shp", "absolute path"),
        ("c:\\escaped.shp", "absolute path"),
    ],
)
def test_archive_members_cannot_leave_the_scratch_folder(tmp_path, member, words):
    dest = tmp_path / "scratch" / "unzipped"
    data = zip_of({"site.shp": b"fine", member: b"evil"})
    with pytest.raises(InputError) as refused:
        _extract_zip(data, dest, "site.zip")
    assert member in refused.value.field and words in refused.value.problem
    assert not dest.exists(), "nothing may be written before every member is checked"
    assert not any(p.name.startswith("escaped") for p in tmp_path.rglob("*"))


def test_symbolic_links_in_archives_are_refused(tmp_path):
    dest = tmp_path / "unzipped"
    data = zip_of({"site.shp": b"fine"}, links={"site.dbf": "/etc/passwd"})
    with pytest.raises(InputError, match="symbolic link"):
        _extract_zip(data, dest, "site.zip")
    assert not dest.exists()


@pytest.fixture
def client(tmp_path):
    db_path = tmp_path / "p.db"
    with TestClient(create_app(db_path, seed=False), base_url=BASE_URL) as test_client:
        test_client.db_path = db_path
        test_client.pid = test_client.post("/api/projects", json=TINY).json()["id"]
        yield test_client


def test_the_site_page_import_refuses_an_escaping_archive(client, tmp_path):
    """Through the web upload: refused with the member named, nothing written, nothing
    stored. The member would land two levels above the import's scratch folder."""
    import tempfile

    name = f"escaped-{uuid.uuid4().hex}.shp"
    data = zip_of({"site.shp": b"x", f"../../{name}": b"evil"})
    before = store_snapshot(client.db_path)
    answer = client.post(
        f"/projects/{client.pid}/site/import",
        data={"role": "site", "expected_revision": "1"},
        files={"gis_file": ("site.zip", data, "application/zip")},
        headers={"HX-Request": "true"},
    )
    assert answer.status_code == 422
    assert name in answer.text and "escaping the folder" in answer.text
    assert store_snapshot(client.db_path) == before
    temp = Path(tempfile.gettempdir())
    for folder in (temp, temp.parent, tmp_path, tmp_path.parent):
        assert not (folder / name).exists()


# ---------------------------------------------------------------- markup in names

SCRIPT = "<script>alert(1)</script>"
BREAKOUT = "\"'><img src=x onerror=alert(2)>"
HOSTILE = f"{SCRIPT}{BREAKOUT}"


def hostile_model() -> dict:
    """The tiny model with markup in every kind of name: project, units (so in every table
    key that names a unit), zone, area, exclusion, method id and name, probe ids, layout,
    descriptions and the currency label."""
    text = json.dumps(TINY)
    inner = json.dumps(HOSTILE)[1:-1]  # as it sits inside a JSON string
    for old in (
        "Tiny example: invented floodplain plot",
        "Made ground",
        "Old channel",
        "Culvert line",
        "Live gas main easement",
        "Cable percussive borehole",
        "Four boreholes",
        "HBH1",
        "BH01",
        "Granular fill with brick and ash (invented)",
    ):
        text = text.replace(old, f"{old} {inner}")
    text = text.replace('"BH"', f'"BH {inner}"')  # the method id, where it is a whole value
    text = text.replace('"GBP"', f'"GBP {inner}"')
    return json.loads(text)


def test_hostile_model_is_valid():
    from probewise.io.model_file import validate_model

    model = hostile_model()
    normal = validate_model(model)
    # accepted as written: the hostile text is kept verbatim, neither stripped nor escaped
    assert normal["name"] == model["name"] and HOSTILE in normal["name"]
    assert [u["name"] for u in normal["units"]] == [u["name"] for u in model["units"]]
    assert HOSTILE in normal["units"][0]["name"]
    assert normal["methods"][0]["id"] == f"BH {HOSTILE}"


PAGES = (
    "/",
    "/projects/{pid}",
    "/projects/{pid}/site",
    "/projects/{pid}/ground",
    "/projects/{pid}/existing",
    "/projects/{pid}/methods",
    "/projects/{pid}/options",
    "/projects/{pid}/compare",
    "/projects/{pid}/schedule",
)


def check_escaped(url: str, answer: httpx.Response) -> None:
    kind = answer.headers.get("content-type", "")
    if "html" not in kind and "svg" not in kind:
        return  # JSON, CSV, PNG...: not markup a browser would run (nosniff is set)
    assert SCRIPT not in answer.text, f"{url}: a name's <script> came back as markup"
    assert "<img src=x" not in answer.text, f"{url}: a name broke out of its attribute"
    assert "onerror=alert(2)>" not in answer.text.replace("&gt;", ""), url


def test_markup_in_names_renders_as_text_on_every_page_and_fragment(client):
    """Every page and its htmx fragment show the names, escaped; so does every same-origin
    link found on them (fragments, charts, maps, downloads)."""
    pid = client.post("/api/projects", json=hostile_model()).json()["id"]
    pages = [p.format(pid=pid) for p in PAGES]
    for url in pages:
        for headers in ({}, {"HX-Request": "true"}):
            answer = client.get(url, headers=headers)
            assert answer.status_code == 200, (url, answer.status_code)
            check_escaped(url, answer)
            assert "&lt;script&gt;alert(1)&lt;/script&gt;" in answer.text, url
    seen: set[str] = set(pages)
    queue = [link for url in pages for link in links_of(client.get(url).text)]
    while queue and len(seen) < 300:
        url = queue.pop(0).split("#")[0]
        if not url.startswith(f"/projects/{pid}") or url in seen:
            continue
        seen.add(url)
        for headers in ({}, {"HX-Request": "true"}):
            answer = client.get(url, headers=headers)
            assert answer.status_code < 500, (url, answer.status_code)
            check_escaped(url, answer)
        if "html" in answer.headers.get("content-type", ""):
            queue += links_of(answer.text)
    assert len(seen) > len(pages)  # fragments and figures were reached too


# ---------------------------------------------------------------- Host and Origin on writes

WRITES = [
    ("/projects/{pid}/ground/units/0", {**UNIT_FORM, "expected_revision": "1", "max": "2.5"}),
    ("/projects/{pid}/site/settings", {"name": "X", "crs": "", "grid_spacing_m": "10",
                                       "expected_revision": "1"}),
    ("/projects/{pid}/options/layouts/new", {"name": "Sneaky", "expected_revision": "1"}),
    ("/projects/{pid}/optimise", {"budget": "20000", "methods": "BH", "expected_revision": "1"}),
    ("/projects/{pid}/undo", {"expected_revision": "1"}),
    ("/projects/{pid}/delete", {}),
    ("/projects/{pid}/duplicate", {}),
]  # fmt: skip


@pytest.mark.parametrize(("path", "data"), WRITES, ids=[w[0] for w in WRITES])
@pytest.mark.parametrize(
    "headers",
    [
        {"Host": "evil.example"},
        {"Host": "127.0.0.1.evil.example:8000"},
        {"Origin": "http://evil.example"},
        {"Origin": "null"},
        {"Origin": "http://127.0.0.1:9999"},
        {"Referer": "http://evil.example/attack.html"},
        {"Origin": "http://evil.example", "HX-Request": "true"},
    ],
    ids=["host", "host-suffix", "origin", "origin-null", "origin-port", "referer", "htmx"],
)
def test_state_changes_from_elsewhere_are_refused(client, path, data, headers):
    before = store_snapshot(client.db_path)
    answer = client.post(path.format(pid=client.pid), data=data, headers=headers)
    assert answer.status_code == (400 if "Host" in headers else 403)
    assert store_snapshot(client.db_path) == before


@pytest.mark.parametrize("method", ["PUT", "POST", "DELETE"])
def test_api_writes_from_elsewhere_are_refused(client, method):
    path = {"PUT": "/api/projects/{pid}", "POST": "/api/projects", "DELETE": "/api/projects/{pid}"}
    body = {"model": TINY, "expected_revision": 1} if method == "PUT" else TINY
    before = store_snapshot(client.db_path)
    for headers in ({"Host": "evil.example"}, {"Origin": "https://evil.example"}):
        answer = client.request(
            method,
            path[method].format(pid=client.pid),
            json=None if method == "DELETE" else body,
            headers=headers,
        )
        assert answer.status_code in (400, 403)
        assert isinstance(answer.json()["detail"], str)
    assert store_snapshot(client.db_path) == before


# ---------------------------------------------------------------- where the server listens


def outward_address() -> str | None:
    """This machine's address on its default route (no packet is sent), if any."""
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as probe:
            probe.connect(("192.0.2.1", 9))  # TEST-NET-1: routing only
            address = probe.getsockname()[0]
    except OSError:
        return None
    return None if address.startswith("127.") else address


def test_serve_passes_loopback_to_the_server_by_default(tmp_path, monkeypatch, capsys):
    from probewise.cli import main

    calls = []
    monkeypatch.setattr("uvicorn.run", lambda app, **kw: calls.append(kw))
    assert main(["serve", "--db", str(tmp_path / "x.db"), "--port", str(free_port())]) == 0
    [options] = calls
    assert options["host"] == "127.0.0.1"
    assert "warning" not in capsys.readouterr().err


@pytest.mark.slow
def test_the_running_server_is_not_reachable_from_the_network(tmp_path):
    with served(tmp_path / "p.db", tmp_path / "serve.log") as base:
        port = int(base.rsplit(":", 1)[1])
        assert httpx.get(f"{base}/api/projects", timeout=5.0).status_code == 200
        address = outward_address()
        if address is None:
            pytest.skip("this machine has no address besides loopback")
        with pytest.raises((httpx.ConnectError, httpx.ConnectTimeout)):
            httpx.get(f"http://{address}:{port}/api/projects", timeout=5.0)
