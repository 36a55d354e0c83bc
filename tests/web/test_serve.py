"""`probewise serve`: the real server in a subprocess, and its argument checks in-process."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import time

import httpx
import pytest

from probewise.cli import main
from probewise.commands import serve
from probewise.local_server import STARTUP_DEADLINE_S, free_port, probewise_command


@pytest.mark.slow
def test_real_server_serves_pages_and_htmx(tmp_path):
    port = free_port()
    db = tmp_path / "served.db"
    log = (tmp_path / "serve.log").open("w+")
    process = subprocess.Popen(
        [*probewise_command(), "serve", "--db", str(db), "--port", str(port)],
        cwd=tmp_path,
        stdout=log,
        stderr=subprocess.STDOUT,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + STARTUP_DEADLINE_S
        page = None
        while time.monotonic() < deadline and process.poll() is None:
            try:
                page = httpx.get(f"{base}/", timeout=2.0)
                break
            except httpx.TransportError:
                time.sleep(0.2)
        log.seek(0)
        output = log.read()
        assert page is not None, f"server did not answer; output:\n{output}"
        assert page.status_code == 200
        assert "Demo (invented)" in page.text  # the demo is seeded into a fresh database
        assert f"http://127.0.0.1:{port}/" in output
        assert str(db) in output
        [htmx_name] = [
            part.split('"')[0]
            for part in page.text.split('src="/static/vendor/')[1:]
            if part.split('"')[0].startswith("htmx-")
        ]
        script = httpx.get(f"{base}/static/vendor/{htmx_name}", timeout=5.0)
        assert script.status_code == 200
        assert "javascript" in script.headers["content-type"]
        rebinding = httpx.get(f"{base}/", headers={"Host": "evil.example"}, timeout=5.0)
        assert rebinding.status_code == 400
    finally:
        process.send_signal(signal.SIGINT)
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)
        log.close()
    assert db.is_file()


@pytest.mark.parametrize("port", ["0", "70000", "-1"])
def test_port_out_of_range_exits_2(tmp_path, capsys, port):
    status = main(["serve", "--db", str(tmp_path / "x.db"), "--port", port])
    assert status == 2
    err = capsys.readouterr().err
    assert err.startswith("--port: ") and err.count("\n") == 1


def test_port_that_is_not_a_number_exits_2(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["serve", "--port", "eighty"])
    assert stop.value.code == 2
    assert "--port" in capsys.readouterr().err


def test_port_in_use_exits_2(tmp_path, capsys):
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        status = main(["serve", "--db", str(tmp_path / "x.db"), "--port", str(port)])
    assert status == 2
    assert "--port: cannot listen" in capsys.readouterr().err


def test_db_in_a_missing_folder_exits_2(tmp_path, capsys):
    status = main(["serve", "--db", str(tmp_path / "nope" / "x.db"), "--port", str(free_port())])
    assert status == 2
    assert capsys.readouterr().err.startswith("--db: ")


def test_non_loopback_host_warns(tmp_path, capsys, monkeypatch):
    calls = []
    monkeypatch.setattr("uvicorn.run", lambda app, **kw: calls.append((app, kw)))
    status = main(
        ["serve", "--db", str(tmp_path / "x.db"), "--host", "0.0.0.0", "--port", str(free_port())]
    )
    assert status == 0
    captured = capsys.readouterr()
    assert "warning" in captured.err and "network" in captured.err
    assert "probewise: serving http://" in captured.out
    [(_, options)] = calls
    assert options["host"] == "0.0.0.0"


def test_loopback_host_does_not_warn(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr("uvicorn.run", lambda app, **kw: None)
    status = main(["serve", "--db", str(tmp_path / "x.db"), "--port", str(free_port())])
    assert status == 0
    captured = capsys.readouterr()
    assert captured.err == ""
    assert f"database {tmp_path / 'x.db'}" in captured.out


@pytest.mark.parametrize(
    ("host", "loopback"),
    [("127.0.0.1", True), ("127.1.2.3", True), ("::1", True), ("localhost", True),
     ("0.0.0.0", False), ("192.168.0.4", False), ("::", False), ("example.org", False)],
)  # fmt: skip
def test_is_loopback(host, loopback):
    assert serve.is_loopback(host) is loopback


def test_url_of():
    assert serve.url_of("127.0.0.1", 8000) == "http://127.0.0.1:8000/"
    assert serve.url_of("::1", 8000) == "http://[::1]:8000/"
    assert serve.url_of("0.0.0.0", 8000) == "http://127.0.0.1:8000/"
