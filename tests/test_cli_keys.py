"""Re-issuing keys from the command line: the new key works on the running server, the old
one is refused, and bad input gets a plain message with exit code 2."""

from __future__ import annotations

import re

from app.cli import main
from tests.helpers.app import TOKEN_HEADER, open_room


def _link_key(out: str) -> tuple[str, str]:
    match = re.search(r"/s/([^#\s]+)#key=(\S+)", out)
    assert match, out
    return match.group(1), match.group(2)


def test_new_facilitator_key_replaces_the_old_one(client, tmp_path, capsys):
    room = open_room(client, treatment="bike_lease", outcome="sick_days")
    ann = room.join("Ann")
    db = str(tmp_path / "arrowmoot.sqlite3")

    assert main(["sessions", "--db", db]) == 0
    listing = capsys.readouterr().out
    assert room.id in listing and "Cycle-to-work workshop" in listing and "Ann" in listing

    assert main(["key", room.id, "--db", db]) == 0
    out = capsys.readouterr().out
    session_id, key = _link_key(out)
    assert session_id == room.id and key != room.facilitator
    url = f"/api/sessions/{room.id}"
    assert client.get(url, headers={TOKEN_HEADER: key}).status_code == 200
    old = client.get(url, headers={TOKEN_HEADER: room.facilitator})
    assert old.status_code == 401 and old.json()["code"] == "bad_token"
    # the new key carries the facilitator's powers; Ann's key is untouched
    r = client.post(f"{url}/commands", json={"type": "set_stage", "stage": "debating"},
                    headers={TOKEN_HEADER: key})
    assert r.status_code == 200, r.text
    assert client.get(url, headers={TOKEN_HEADER: ann}).status_code == 200


def test_new_key_for_a_named_member(client, tmp_path, capsys):
    room = open_room(client, treatment="bike_lease", outcome="sick_days")
    ann = room.join("Ann")
    db = str(tmp_path / "arrowmoot.sqlite3")
    assert main(["key", room.id, "--member", "ann", "--db", db]) == 0
    _, key = _link_key(capsys.readouterr().out)
    url = f"/api/sessions/{room.id}"
    me = client.get(url, headers={TOKEN_HEADER: key}).json()
    assert client.get(url, headers={TOKEN_HEADER: ann}).status_code == 401
    r = client.post(f"{url}/commands", json={"type": "set_stage", "stage": "debating"},
                    headers={TOKEN_HEADER: key})
    assert r.status_code == 403, r.text  # still a participant
    assert me["state"]["revision"] == room.state()["revision"]


def test_bad_input_is_named(client, tmp_path, capsys):
    room = open_room(client, treatment="bike_lease", outcome="sick_days")
    db = str(tmp_path / "arrowmoot.sqlite3")
    assert main(["key", "nosuchsession", "--db", db]) == 2
    assert "no session 'nosuchsession'" in capsys.readouterr().err
    assert main(["key", "-Ab3", "--db", db]) == 2  # ids may start with "-": read as an id, not an option
    assert "no session '-Ab3'" in capsys.readouterr().err
    assert main(["key", room.id, "--member", "Zed", "--db", db]) == 2
    assert "no member named 'Zed'" in capsys.readouterr().err
    assert main(["sessions", "--db", str(tmp_path / "missing.sqlite3")]) == 2
    assert "no database at" in capsys.readouterr().err
    assert not (tmp_path / "missing.sqlite3").exists()  # nothing created by a typo
