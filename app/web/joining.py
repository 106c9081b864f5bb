"""Where the room joins: the join link people can actually reach, and its QR code.

A server that listens on loopback only (``arrowmoot serve`` without ``--host``) can
be reached from this computer alone, so the join screen says how to let the room
in instead of showing an address nobody else can open. A server that listens
beyond shows an address others can reach: the one the facilitator's browser used
when that is not loopback, the address given to ``--host``, or this computer's
own network addresses when it listens on every interface. The QR code of the
join link is drawn by segno.

    GET /api/sessions/{id}/join-address    any member
"""

from __future__ import annotations

import ipaddress
import os
import socket
from urllib.parse import urlsplit

import segno
from fastapi import APIRouter, Request

from .deps import MemberDep

router = APIRouter(prefix="/api")

WILDCARDS = {"0.0.0.0", "::", ""}


def _is_loopback(host: str) -> bool:
    host = host.strip("[]")
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def own_addresses() -> list[str]:
    """This computer's IPv4 addresses other than loopback (read locally, nothing is sent)."""
    try:
        infos = socket.getaddrinfo(socket.gethostname(), None, socket.AF_INET)
    except OSError:
        return []
    return sorted({info[4][0] for info in infos if not _is_loopback(info[4][0])})


def join_address(*, listen_host: str, port: int, browser_host: str, scheme: str, code: str,
                 public_url: str = "", addresses: list[str] | None = None) -> dict:
    """The join link for the room and what to tell the facilitator about it."""
    path = f"/join/{code}"
    if public_url and not _is_loopback(urlsplit(public_url).hostname or ""):
        base = public_url.rstrip("/")  # set by whoever put the server behind a proxy
    elif _is_loopback(listen_host):
        return {"listening": "loopback", "url": None, "qr": None, "path": path,
                "advice": "The server listens on this computer only, so nobody else in the room can "
                          "open its address. Start it again with arrowmoot serve --host 0.0.0.0 (every "
                          "network interface) or --host and this computer's address on the room's "
                          "network; the README says what that lets others reach."}
    elif browser_host and not _is_loopback(urlsplit(f"//{browser_host}").hostname or ""):
        base = f"{scheme}://{browser_host}"
    elif listen_host not in WILDCARDS:
        shown = f"[{listen_host}]" if ":" in listen_host else listen_host
        base = f"{scheme}://{shown}:{port}"
    else:
        found = own_addresses() if addresses is None else addresses
        if not found:
            return {"listening": "network", "url": None, "qr": None, "path": path,
                    "advice": "The server listens on every network interface, but this computer's "
                              f"address could not be found here. Give the room http://ADDRESS:{port}{path}, "
                              "with the address your network settings show."}
        base = f"{scheme}://{found[0]}:{port}"
    url = base + path
    qr = segno.make(url, error="m").svg_data_uri(scale=6, border=2, dark="#111111", light="#ffffff")
    return {"listening": "network", "url": url, "qr": qr, "path": path, "advice": None}


@router.get("/sessions/{session_id}/join-address")
def read_join_address(access: MemberDep, request: Request) -> dict:
    """The join link people in the room can open, with its QR code, or how to make one."""
    server = request.scope.get("server") or ("", 0)
    listen_host = os.environ.get("ARROWMOOT_LISTEN_HOST") or server[0] or ""
    port = int(os.environ.get("ARROWMOOT_LISTEN_PORT") or server[1] or 8000)
    out = join_address(listen_host=listen_host, port=port, browser_host=request.headers.get("host", ""),
                       scheme=request.url.scheme, code=access.workshop.join_code,
                       public_url=os.environ.get("ARROWMOOT_PUBLIC_URL", ""))
    return {"ok": True, **out}
