"""The join screen shows an address the room can reach, with a QR code, or says how to
make one when the server listens on this computer only."""

from __future__ import annotations

import base64
import urllib.parse

import pytest

from app.web.joining import join_address

BASE = dict(port=8000, scheme="http", code="K7QX3M")


def _svg(data_uri):
    assert data_uri.startswith("data:image/svg+xml")
    payload = data_uri.split(",", 1)[1]
    return base64.b64decode(payload).decode() if ";base64" in data_uri.split(",", 1)[0] else urllib.parse.unquote(payload)


def test_loopback_only_gives_the_host_advice_and_no_address():
    out = join_address(listen_host="127.0.0.1", browser_host="127.0.0.1:8000", **BASE)
    assert out["listening"] == "loopback" and out["url"] is None and out["qr"] is None
    assert "arrowmoot serve --host 0.0.0.0" in out["advice"]


@pytest.mark.parametrize("listen, browser, addresses, url", [
    ("0.0.0.0", "192.0.2.10:8000", None, "http://192.0.2.10:8000/join/K7QX3M"),   # the facilitator used the network address
    ("192.0.2.20", "127.0.0.1:8000", None, "http://192.0.2.20:8000/join/K7QX3M"),  # --host with one address
    ("0.0.0.0", "localhost:8000", ["192.0.2.30"], "http://192.0.2.30:8000/join/K7QX3M"),  # every interface
    ("::", "[::1]:8000", ["192.0.2.40"], "http://192.0.2.40:8000/join/K7QX3M"),
])
def test_a_server_listening_beyond_shows_a_reachable_address(listen, browser, addresses, url):
    out = join_address(listen_host=listen, browser_host=browser, addresses=addresses, **BASE)
    assert out["listening"] == "network" and out["url"] == url and out["advice"] is None
    svg = _svg(out["qr"])
    assert svg.startswith("<?xml") or "<svg" in svg


def test_every_interface_without_a_found_address_says_so():
    out = join_address(listen_host="0.0.0.0", browser_host="127.0.0.1:8000", addresses=[], **BASE)
    assert out["url"] is None and "could not be found" in out["advice"]


def test_a_proxy_address_wins():
    out = join_address(listen_host="127.0.0.1", browser_host="127.0.0.1:8000",
                       public_url="https://workshop.example.org/", **BASE)
    assert out["url"] == "https://workshop.example.org/join/K7QX3M"


def test_the_qr_code_changes_with_the_link():
    one = join_address(listen_host="192.0.2.20", browser_host="", **BASE)["qr"]
    other = join_address(listen_host="192.0.2.20", browser_host="", **dict(BASE, code="ZZZZZZ"))["qr"]
    assert one != other


def test_join_address_needs_a_member_key(client, room):
    assert client.get(f"/api/sessions/{room.id}/join-address").status_code == 401
    r = client.get(f"/api/sessions/{room.id}/join-address", headers={"X-Arrowmoot-Token": room.facilitator})
    assert r.status_code == 200 and r.json()["path"] == f"/join/{room.join_code}"
