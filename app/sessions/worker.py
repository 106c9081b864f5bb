"""The analysis worker: a child process that analyses workshop states.

The server starts it with ``python -m app.sessions.worker`` and talks JSON lines
over stdin/stdout: one workshop state in, one analysis out. Running the
analysis here keeps its CPU time away from the event loop that pushes edits.
The worker exits when its stdin closes, so it never outlives the server.
"""

from __future__ import annotations

import json
import os
import sys


def main() -> None:
    from app.workshop.disputes import analyse_state

    try:
        os.nice(5)  # background work: the server's live pushes come first
    except OSError:
        pass

    out = sys.stdout
    for line in sys.stdin:
        try:
            result = {"ok": True, "result": analyse_state(json.loads(line))}
        except Exception as exc:  # report, keep serving
            result = {"ok": False, "error": f"{type(exc).__name__}: {exc}"}
        out.write(json.dumps(result) + "\n")
        out.flush()


if __name__ == "__main__":
    main()
