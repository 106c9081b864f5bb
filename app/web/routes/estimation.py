"""The estimation stage over HTTP, within a session.

Data is attached (streamed to the session's data directory with a size
limit), profiled and mapped to the diagram's variables; then the analyst asks
for the estimate (with the implication tests), the checks of the diagram against
the data (a verdict), the sensitivity analysis and the estimate under each combination of disputed
arrows. Results are kept as session attachments and announced to everyone in
the room. A refused upload or request changes nothing that was there.

Endpoints (under ``/api/sessions/{session_id}/estimation``; writes need the
analyst or facilitator role and the ``agreed`` or ``estimation`` stage):

``GET ""``                 attached data (profile, mapping), variables, latest results
``PUT /data?name=F``       raw CSV or Parquet bytes as the body (413 over the limit)
``PUT /mapping``           ``{"mapping": {variable: column or null}}``
``POST /estimate``         ``{"method", "adjust", "correction": holm|bh|none, "checks"}``
``POST /validation``       ``{"method", "adjust", "resamples", "set_cap", "wait"}``: starts the checks
                           against the data in the background (``wait``: answer when done)
``GET /validation/run``    progress of the latest run: ``{"state", "done", "total", "share", "step"}``
``POST /validation/stop``  stop the running checks (nothing stored)
``POST /sensitivity``      ``{"method", "adjust"}``, read with the room's stated hidden causes
                           (adds ``charts.hidden_cause``)
``POST /disputes``         ``{"disputed": [...]}`` or the room's disputed arrows (``charts.forest``)

Results are kept under the attachment keys ``estimation.estimate``,
``estimation.validation``, ``estimation.sensitivity``, ``estimation.disputes``;
the data under ``estimation.data``. ``Sessions.attach_data`` (app/sessions)
attaches a file outside a request (for seeding a session).
"""

from __future__ import annotations

import os
import time
from typing import Any

from fastapi import APIRouter, Body, Request, Response
from starlette.concurrency import run_in_threadpool

from ...errors import AppError, BadRequest, Conflict, NotFound, PayloadTooLarge, Unprocessable
from ...estimation import service, validation
from ...estimation.columns import blank_text_cells, mapping_warnings
from ...estimation.offer import method_offer
from ...estimation.design import check_mapping, propose_mapping
from ...estimation.samples import is_sample_file
from ...estimation.tables import load_table, profile_table
from ...graph.errors import DiagramError
from ...reporting import charts
from ...sessions.data import DATA_KEY, RESULT_KEYS, data_info, stored_name
from ..deps import AnalystDep, AttachDataDep, EstimateDep, MapColumnsDep, MemberDep
from ..runs import RUNS, RunRefused

router = APIRouter(prefix="/api/sessions/{session_id}/estimation", tags=["estimation"])

_CACHE: dict[str, tuple[tuple, Any]] = {}


def _display_name(raw: str) -> str:
    """The file name as people will see it: no folders (either slash), no control
    characters, at most 120 characters. The file itself is always stored as data.<ext>."""
    name = raw.replace("\\", "/").rsplit("/", 1)[-1]
    name = "".join(ch for ch in name if ch.isprintable()).strip().lstrip(".")
    return name[:120] or "data.csv"


def _data_info(access) -> dict:
    info = access.get_attachment(DATA_KEY)
    if not info:
        raise BadRequest("no data is attached to this session yet; upload a CSV or Parquet file first",
                         code="no_data")
    if info.get("mapping") is None:  # attached outside a request: propose exact-name matches
        info = {**info, "mapping": propose_mapping(access.diagram().names, info["columns"])}
    return info


def _frame(access, info: dict):
    path = access.data_dir() / info["stored"]
    if not path.is_file():
        raise NotFound("the attached data file is missing on the server; upload it again", code="data_missing")
    stat = path.stat()
    key = (str(path), stat.st_mtime_ns, stat.st_size)
    blanked = tuple(info.get("text_as_missing") or ())
    key = (*key, blanked)
    cached = _CACHE.get(access.session_id)
    if cached and cached[0] == key:
        return cached[1]
    frame = blank_text_cells(load_table(path, max_bytes=None, name=info["name"]), blanked)
    _CACHE[access.session_id] = (key, frame)
    if len(_CACHE) > 2:  # each entry is a whole table in memory
        _CACHE.pop(next(iter(_CACHE)))
    return frame


def _fingerprint(access) -> str:
    import hashlib
    import json

    text = json.dumps(access.document(), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _room_fingerprint(access) -> str:
    import hashlib
    import json

    from ...workshop.hidden_causes import statements_for_estimate

    text = json.dumps(statements_for_estimate(access.workshop), sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _with_warnings(access, info: dict) -> dict:
    """The data record as shown: with a warning for each column the estimate cannot read as mapped."""
    d = access.diagram()
    roles = {v: "treatment" if v in d.treatment else "outcome" if v in d.outcome else None for v in d.names}
    return {**info, "warnings": mapping_warnings(info.get("profile") or [], info.get("mapping") or {}, roles)}


def _offer(access, info: dict) -> list[dict] | None:
    """The methods that apply to the diagram and the mapped columns, and why the others do not."""
    try:
        return method_offer(access.diagram(), info.get("mapping") or {}, info.get("profile") or [])
    except DiagramError:
        return None


def _variables(access) -> list[dict]:
    d = access.diagram()
    return [{"name": v.name, "label": v.label, "latent": v.latent,
             "role": "treatment" if v.name in d.treatment else "outcome" if v.name in d.outcome else None}
            for v in d.variables]


@router.get("")
def read_estimation(access: MemberDep, request: Request) -> dict:
    """What is attached, how it is mapped, and the latest results."""
    info = access.get_attachment(DATA_KEY)
    if info and info.get("mapping") is None:
        info = {**info, "mapping": propose_mapping(access.diagram().names, info["columns"])}
    if info:
        info = {**_with_warnings(access, info), "sample_data": is_sample_file(access.data_dir() / info["stored"]),
                "methods": _offer(access, info)}
    out = {"ok": True, "stage": access.stage, "revision": access.revision, "data": info,
           "variables": _variables(access), "upload_limit_bytes": request.app.state.settings.upload_limit_bytes}
    fingerprint = _fingerprint(access)
    for key in RESULT_KEYS:
        result = access.get_attachment(key)
        if result is not None:
            result["stale"] = (result.get("diagram_fingerprint") != fingerprint
                               or result.get("data_uploaded_at") != (info or {}).get("uploaded_at"))
            if key == "estimation.sensitivity":  # the room has changed what it stated since
                room = _room_fingerprint(access)
                result["stale"] = result["stale"] or result.get("room_fingerprint", room) != room
        out[key.split(".", 1)[1]] = result
    run = RUNS.get(access.session_id, "validation")
    out["validation_run"] = run.to_json() if run else None
    return out


@router.put("/data")
async def upload_data(access: AttachDataDep, request: Request, name: str = "data.csv") -> dict:
    """Attach a data file (raw CSV or Parquet bytes as the body), streamed to disk with a size limit."""
    limit = request.app.state.settings.upload_limit_bytes
    declared = request.headers.get("content-length")
    if declared and declared.isdigit() and int(declared) > limit:
        raise PayloadTooLarge(f"the file is {int(declared) / 1048576:.1f} MB; the limit is {limit / 1048576:.1f} MB",
                              code="file_too_large")
    name = _display_name(name)
    folder = access.data_dir()
    partial = folder / f"upload-{time.time_ns()}.part"
    size = 0
    try:
        with open(partial, "wb") as handle:
            async for chunk in request.stream():
                size += len(chunk)
                if size > limit:
                    raise PayloadTooLarge(f"the file is over the limit of {limit / 1048576:.1f} MB",
                                          code="file_too_large")
                handle.write(chunk)
        frame = await run_in_threadpool(load_table, partial, max_bytes=limit, name=name)
        profile = await run_in_threadpool(profile_table, frame)
    except BaseException:  # refused, too large or cut off: no half-written file stays behind
        partial.unlink(missing_ok=True)
        raise
    stored = stored_name(partial)
    for old in folder.glob("data.*"):
        if old.name != stored:
            old.unlink(missing_ok=True)
    os.replace(partial, folder / stored)
    stat = (folder / stored).stat()
    _CACHE[access.session_id] = ((str(folder / stored), stat.st_mtime_ns, stat.st_size), frame)
    diagram = access.diagram()
    previous = (access.get_attachment(DATA_KEY) or {}).get("mapping") or {}
    mapping = propose_mapping(diagram.names, frame.columns)
    for var, col in previous.items():
        if var in diagram.names and col in frame.columns and col not in mapping.values():
            mapping[var] = col
    info = data_info(frame, name=name, stored=stored, size=size, mapping=mapping, profile=profile)
    access.put_attachment(DATA_KEY, info)
    for key in RESULT_KEYS:
        access.delete_attachment(key)
    await access.log(f"attached data {name} ({len(frame)} rows, {frame.shape[1]} columns)", kind="estimation")
    return {"ok": True, "data": {**_with_warnings(access, info), "methods": _offer(access, info)}}


@router.put("/mapping")
async def update_mapping(access: MapColumnsDep, body: Any = Body(...)) -> dict:
    """Say which column measures which variable (null or empty: unmeasured)."""
    info = _data_info(access)
    raw = body.get("mapping") if isinstance(body, dict) else None
    mapping = check_mapping(raw, access.diagram().names, info["columns"])
    info = {**info, "mapping": mapping}
    blank = body.get("text_as_missing") if isinstance(body, dict) else None
    if blank is not None:
        info = await run_in_threadpool(_blank_text, access, info, blank)
    access.put_attachment(DATA_KEY, info)
    unmeasured = sorted(set(access.diagram().names) - set(mapping))
    await access.log("mapped measures to variables" + (f"; unmeasured: {', '.join(unmeasured)}" if unmeasured else ""),
                     kind="estimation")
    return {"ok": True, "data": {**_with_warnings(access, info), "methods": _offer(access, info)}}


def _blank_text(access, info: dict, columns: Any) -> dict:
    """Record that the text cells of these mostly-numeric columns count as missing, and profile them again."""
    if not isinstance(columns, list) or not all(isinstance(c, str) for c in columns):
        raise BadRequest("'text_as_missing' must be a list of column names", code="invalid_field")
    unknown = [c for c in columns if c not in info["columns"]]
    if unknown:
        raise BadRequest(f"'text_as_missing' names {unknown[0]!r}, which is not a column of the data",
                         code="invalid_field")
    changed = sorted(set(columns) | set(info.get("text_as_missing") or ()))
    info = {**info, "text_as_missing": sorted(set(columns))}
    frame = _frame(access, info)
    fresh = {p["name"]: p for p in service.json_ready(profile_table(frame[changed]))} if changed else {}
    return {**info, "profile": [fresh.get(p["name"], p) for p in info["profile"]]}


def _options(body: Any) -> dict:
    if body is None:
        return {}
    if not isinstance(body, dict):
        raise BadRequest("send a JSON object of options", code="invalid_request")
    method = body.get("method") or None
    adjust = body.get("adjust")
    if adjust is not None and (not isinstance(adjust, list) or not all(isinstance(a, str) for a in adjust)):
        raise BadRequest("'adjust' must be a list of variable names", code="invalid_field")
    return {"method": method, "adjust": adjust}


async def _run(access, fn, **kwargs):
    info = _data_info(access)
    fingerprint = _fingerprint(access)
    diagram = access.diagram()
    frame = await run_in_threadpool(_frame, access, info)
    result = await run_in_threadpool(lambda: fn(diagram, frame, info.get("mapping"), **kwargs))
    result = service.json_ready(result)
    result["diagram_fingerprint"] = fingerprint
    result["data_name"] = info["name"]
    result["data_uploaded_at"] = info.get("uploaded_at")
    return result


@router.post("/estimate")
async def create_estimate(access: EstimateDep, body: Any = Body(None)) -> dict:
    """The estimate the diagram identifies, with its implications tested against the data."""
    opts = _options(body)
    correction = (body or {}).get("correction", "holm")
    if correction not in ("holm", "bh", "none"):
        raise BadRequest("'correction' must be holm, bh or none", code="invalid_field")
    checks = (body or {}).get("checks", True)
    if not isinstance(checks, bool):
        raise BadRequest("'checks' must be true or false", code="invalid_field")
    result = await _run(access, service.estimate, correction=correction, checks=checks, **opts)
    chart = {}
    overlap = result["details"].get("overlap")
    if overlap:
        chart["overlap"] = charts.overlap_histogram(overlap, treated_label=f"{result['treatment']} = 1",
                                                    untreated_label=f"{result['treatment']} = 0")
    result["charts"] = chart
    access.put_attachment("estimation.estimate", result)
    lo, hi = result["ci"]
    failing = (result["checks"] or {}).get("failing", 0)
    await access.log(f"estimated the effect: {result['estimate']:.3g} [{lo:.3g}, {hi:.3g}] by {result['method']}"
                     + (f"; {failing} implication(s) fail against the data" if failing else ""),
                     kind="estimation", highlight=(result["checks"] or {}).get("highlight"))
    return {"ok": True, "result": result}


def _validation_options(body: Any) -> dict:
    opts = _options(body)
    body = body or {}
    resamples = body.get("resamples", validation.RESAMPLES)
    if isinstance(resamples, bool) or not isinstance(resamples, int) or not 20 <= resamples <= 2000:
        raise BadRequest("'resamples' must be a whole number from 20 to 2000", code="invalid_field")
    cap = body.get("set_cap", validation.SET_CAP)
    if isinstance(cap, bool) or not isinstance(cap, int) or not 1 <= cap <= 20:
        raise BadRequest("'set_cap' must be a whole number from 1 to 20", code="invalid_field")
    correction = body.get("correction", "holm")
    if correction not in ("holm", "bh", "none"):
        raise BadRequest("'correction' must be holm, bh or none", code="invalid_field")
    return {"method": opts.get("method"), "adjust": opts.get("adjust"), "resamples": resamples, "set_cap": cap,
            "correction": correction}


@router.post("/validation", status_code=202)
async def create_validation(access: EstimateDep, response: Response, body: Any = Body(None)) -> dict:
    """Start the checks that can contradict the diagram; poll ``/validation/run`` for progress
    (202), or with ``"wait": true`` answer with the result when they end (200)."""
    opts = _validation_options(body)
    wait = (body or {}).get("wait", False)
    if not isinstance(wait, bool):
        raise BadRequest("'wait' must be true or false", code="invalid_field")
    if RUNS.is_running(access.session_id, "validation"):
        raise Conflict("the checks are already running for this session; stop them or wait", code="already_running")
    info = _data_info(access)
    fingerprint = _fingerprint(access)
    diagram = access.diagram()
    frame = await run_in_threadpool(_frame, access, info)
    # refuse bad input at once, before anything runs
    prepared = await run_in_threadpool(service.prepare, diagram, frame, info.get("mapping"),
                                       opts["method"], opts["adjust"])

    def work(run):
        return service.validate(diagram, frame, info.get("mapping"), prepared=prepared, progress=run.progress,
                                stop=run.stopped, **opts)

    async def finish(run, result):
        result = service.json_ready(result)
        result.update(diagram_fingerprint=fingerprint, data_name=info["name"],
                      data_uploaded_at=info.get("uploaded_at"), seconds=round(time.time() - run.started, 2))
        access.put_attachment("estimation.validation", result)
        await access.log(f"checked the diagram against the data: {result['verdict']} "
                         f"({result['contradicted']} of {result['run']} checks contradict it)", kind="estimation")

    def fail(run, exc):
        return exc.message if isinstance(exc, (AppError, RunRefused)) else None

    run = RUNS.start(access.session_id, "validation", work, finish, fail)
    if wait:
        await RUNS.wait(run)
        if run.state == "failed":
            raise Unprocessable(run.message, code="validation_failed")
        response.status_code = 200
        return {"ok": True, "run": run.to_json(), "result": access.get_attachment("estimation.validation")}
    return {"ok": True, "run": run.to_json()}


@router.get("/validation/run")
def read_validation_run(access: MemberDep) -> dict:
    """Progress of the latest run of the checks (``null`` when none ran since the server started)."""
    run = RUNS.get(access.session_id, "validation")
    return {"ok": True, "run": run.to_json() if run else None}


@router.post("/validation/stop")
async def stop_validation(access: AnalystDep) -> dict:
    """Stop the running checks; what was stored before stays."""
    run = RUNS.stop(access.session_id, "validation")
    if run is None or run.state != "running":
        raise Conflict("no checks are running for this session", code="not_running")
    await RUNS.wait(run)
    await access.log("stopped the checks against the data", kind="estimation")
    return {"ok": True, "run": run.to_json()}


@router.post("/sensitivity")
async def create_sensitivity(access: EstimateDep, body: Any = Body(None)) -> dict:
    """How strong an unmeasured confounder would have to be to change the conclusion."""
    from ...workshop.hidden_causes import statements_for_estimate

    result = await _run(access, service.sensitivity, statements=statements_for_estimate(access.workshop),
                        **_options(body))
    if result.get("regression"):
        result["charts"] = {"hidden_cause": charts.hidden_cause_chart(result["regression"])}
    result["room_fingerprint"] = _room_fingerprint(access)
    access.put_attachment("estimation.sensitivity", result)
    await access.log("ran the sensitivity analysis", kind="estimation")
    return {"ok": True, "result": result}


@router.post("/disputes")
async def create_disputes(access: EstimateDep, body: Any = Body(None)) -> dict:
    """The estimate under each combination of the room's disputed arrows, as a forest plot."""
    from ...workshop.voting import disputed_items

    opts = _options(body)
    items = (body or {}).get("disputed")
    if items is None:
        items = [{"pair": i["pair"], "options": i["options"]} for i in disputed_items(access.workshop)]
    if not isinstance(items, list):
        raise BadRequest("'disputed' must be a list of arrows", code="invalid_field")
    result = await _run(access, service.disputed_estimates, disputed=items, method=opts.get("method"))
    rows = [{"label": r["label"], "estimate": r["estimate"],
             "low": r["ci"][0] if r["ci"] else None, "high": r["ci"][1] if r["ci"] else None,
             "problem": r["problem"]} for r in result["rows"]]
    drawn = next((i for i, r in enumerate(result["rows"]) if r["as_drawn"]), None)
    result["charts"] = {"forest": charts.forest_plot(rows, highlight=drawn)} if rows else {}
    access.put_attachment("estimation.disputes", result)
    await access.log(f"estimated under {len(rows)} combination(s) of disputed arrows", kind="estimation")
    return {"ok": True, "result": result}
