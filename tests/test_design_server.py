"""The design page's server: loopback only, the token on every request, its own page and
API only (nothing of the site folder is served), edits refused with the site file's words,
and the command's one-line error for a bad site file.

Site: tests/design_site.py (invented "Brindle Marsh depot")."""
from __future__ import annotations

import json
import os
import re
import signal
import socket
import subprocess
import sys
import threading
import urllib.error
import urllib.request

from pathlib import Path

import pytest

from design_site import write_design_site
from fillstress.cli import main
from fillstress.design.server import TOKEN_HEADER, DesignServer
from fillstress.design.state import DesignSession

SRC = Path(__file__).resolve().parents[1] / "src"
# no proxy from the environment between the test and 127.0.0.1
OPENER = urllib.request.build_opener(urllib.request.ProxyHandler({}))


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    path = write_design_site(tmp_path_factory.mktemp("depot"))
    srv = DesignServer(DesignSession(path))
    thread = threading.Thread(target=srv.serve_forever, kwargs={"poll_interval": 0.05})
    thread.start()
    yield srv
    srv.shutdown()
    srv.server_close()
    thread.join()


def fetch(srv, path, token=True, data=None, header=False):
    host, port = srv.server_address[:2]
    url = f"http://{host}:{port}{path}"
    if token and not header:
        url += ("&" if "?" in url else "?") + f"token={srv.token}"
    req = urllib.request.Request(url, data=None if data is None else json.dumps(data).encode())
    if header:
        req.add_header(TOKEN_HEADER, srv.token)
    try:
        with OPENER.open(req, timeout=30) as r:
            return r.status, r.read()
    except urllib.error.HTTPError as e:
        return e.code, e.read()


def test_it_listens_on_loopback_only_with_a_fresh_token(server):
    assert server.server_address[0] == "127.0.0.1"
    assert server.server_address[1] > 0 and len(server.token) >= 32
    assert f"/?token={server.token}" in server.url
    other = DesignServer(server.session)
    try:
        assert other.token != server.token and other.server_address[1] != server.server_address[1]
    finally:
        other.server_close()
    addresses = {a[4][0] for a in socket.getaddrinfo(socket.gethostname(), None, socket.AF_INET)}
    for address in addresses - {"127.0.0.1"}:
        with pytest.raises(OSError):
            socket.create_connection((address, server.server_address[1]), timeout=2).close()


@pytest.mark.parametrize("path", ["/", "/api/state", "/depot.toml"])
def test_no_token_no_page(server, path):
    assert fetch(server, path, token=False)[0] == 403
    assert fetch(server, path + "?token=not-the-token", token=False)[0] == 403
    assert fetch(server, "/api/edit", token=False, data={"op": "undo"})[0] == 403


@pytest.mark.parametrize("path", ["/depot.toml", "/../depot.toml", "/%2e%2e/depot.toml",
                                  "/api/../depot.toml", "/page.html", "/api/files"])
def test_nothing_but_the_page_and_its_api(server, path):
    status, body = fetch(server, path)
    assert status == 404 and b"Brindle" not in body
    assert fetch(server, path, data={"op": "undo"})[0] == 404


def test_the_page_and_the_state_with_the_token(server):
    status, page = fetch(server, "/")
    assert status == 200 and b"<canvas" in page and b"http" not in page.replace(b"http.", b"")
    status, body = fetch(server, "/api/state", header=True)
    state = json.loads(body)
    assert status == 200 and state["site"]["name"] == "Brindle Marsh depot"
    assert [b["name"] for b in state["bodies"]] == ["pad", "heap", "bund"]


def test_an_invalid_edit_is_refused_with_the_site_file_words(server):
    status, body = fetch(server, "/api/edit",
                         data={"op": "set", "body": "pad", "values": {"height": -2}})
    assert status == 422
    assert json.loads(body)["error"].endswith("[bodies.pad.height] must be ≥ 0, got -2")
    assert fetch(server, "/api/edit", data=["not", "an", "object"])[0] == 400
    status, body = fetch(server, "/api/save", data={"name": "../elsewhere.toml"})
    assert status == 422 and "without folders" in json.loads(body)["error"]


def test_a_bad_site_file_is_one_line_and_exit_2(tmp_path, capsys):
    path = write_design_site(tmp_path)
    path.write_text(path.read_text().replace("repose_angle = 36.0", "repose_angle = -36.0"))
    assert main(["design", str(path), "--no-browser"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "bodies.heap.repose_angle" in err


@pytest.mark.parametrize("stop", [signal.SIGINT, signal.SIGTERM])
def test_the_command_prints_the_address_serves_and_stops_cleanly(tmp_path, stop):
    path = write_design_site(tmp_path)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(SRC), os.environ.get("PYTHONPATH", "")])}
    proc = subprocess.Popen([sys.executable, "-m", "fillstress.cli", "design", str(path),
                             "--no-browser"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env)
    try:
        first = proc.stdout.readline()
        url = re.search(r"http://127\.0\.0\.1:\d+/\?token=[\w-]+", first).group(0)
        with OPENER.open(url, timeout=30) as r:
            assert r.status == 200
        with pytest.raises(urllib.error.HTTPError) as refused:
            OPENER.open(url.split("?")[0], timeout=30)
        assert refused.value.code == 403
        proc.send_signal(stop)
        out, err = proc.communicate(timeout=30)
    finally:
        proc.kill()
    assert proc.returncode == 0 and "design page stopped" in out and err == ""
    assert sorted(p.name for p in tmp_path.iterdir()) == ["depot.toml"]


def test_a_negative_depth_is_refused_in_the_site_unit(tmp_path, capsys):
    from design_site import US_SITE
    path = write_design_site(tmp_path, US_SITE)
    assert main(["design", str(path), "--no-browser", "--depth", "-3"]) == 2
    assert capsys.readouterr().err.strip().endswith(
        "argument --depth: must be >= 0 ft below the ground, got -3")
