"""The workbench application (Starlette). See ``saltplan/web/__init__.py``."""
from __future__ import annotations

import contextlib
import re
from pathlib import Path

from jinja2 import ChoiceLoader, Environment, FileSystemLoader, StrictUndefined, select_autoescape
from starlette.applications import Starlette
from starlette.exceptions import HTTPException
from starlette.requests import Request
from starlette.responses import HTMLResponse, RedirectResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from ..errors import SaltplanError
from .chem import MAX_STRUCTURE_CHARS, matches, parent_from_text
from .jobs import EXPORTS, MAX_ROWS, JobRunner
from .security import CSRF_FIELD, BodyLimit, SecurityHeaders, TokenGate, csrf_ok
from .store import Store
from .wells import FIELDS, Conflict, WellBook, not_ready

HERE = Path(__file__).parent
#: largest request body [bytes] (a structure file, a results file, a portfolio)
MAX_BODY_BYTES = 5_000_000
#: form limits handed to python-multipart
MAX_FIELDS, MAX_FILES = 60, 1
_CID = re.compile(r"^c[0-9]{1,9}$")
_OUTCOMES = ("crystalline", "amorphous", "oil", "gel", "clear_solution")
#: result table of a portfolio run: (sort key or "", header, numeric)
PORTFOLIO_COLUMNS = (("row", "row", True), ("", "structure", False), ("id", "id", False),
                     ("name", "name", False), ("verdict", "verdict", False),
                     ("most_basic_pka", "most basic pKa", True),
                     ("most_acidic_pka", "most acidic pKa", True),
                     ("n_feasible", "feasible counterions", True),
                     ("", "top counterions", False), ("main_risk", "main risk", False))
ROUTES_OF_ADMIN = ("oral", "parenteral", "inhalation", "topical", "other")


def _environment() -> Environment:
    from ..reports import html_environment

    reports = html_environment()
    env = Environment(loader=ChoiceLoader([FileSystemLoader(str(HERE / "templates")),
                                           reports.loader]),
                      autoescape=select_autoescape(("html", "j2", "html.j2")),
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    return env


class Workbench:
    def __init__(self, jobs_root: Path | None = None):
        self.store = Store()
        self.env = _environment()
        self.jobs = JobRunner(jobs_root)

    def page(self, request: Request, template: str, status: int = 200, **ctx) -> HTMLResponse:
        html = self.env.get_template(template).render(
            csrf=request.scope.get("state", {}).get("csrf", ""), csrf_field=CSRF_FIELD,
            request_path=request.url.path, **ctx)
        return HTMLResponse(html, status_code=status)

    async def form(self, request: Request):
        """The posted form, refused (403) without a matching CSRF token."""
        try:
            form = await request.form(max_files=MAX_FILES, max_fields=MAX_FIELDS,
                                      max_part_size=MAX_BODY_BYTES)
        except HTTPException:
            raise
        except Exception as exc:  # malformed multipart
            raise HTTPException(400, f"form could not be read: {exc}") from None
        if not csrf_ok(request, form):
            raise HTTPException(403, "form refused: its security token is missing or stale; "
                                "reload the page and try again")
        return form

    def job(self, request: Request):
        job = self.jobs.get(request.path_params["job"])
        if job is None:
            raise HTTPException(404, "no such portfolio run in this workbench (runs are kept "
                                "while the workbench runs)")
        return job

    def compound(self, request: Request):
        cid = request.path_params["cid"]
        item = self.store.get(cid) if _CID.match(cid) else None
        if item is None:
            raise HTTPException(404, "no such compound in this workbench")
        return item


async def _text_of_upload(upload) -> str:
    raw = await upload.read(MAX_STRUCTURE_CHARS * 4 + 1)
    if len(raw) > MAX_STRUCTURE_CHARS * 4:
        raise SaltplanError(f"file '{upload.filename}' is too large for one structure")
    if b"\0" in raw[:4096]:
        raise SaltplanError(f"file '{upload.filename}' is binary; expected a MOL, SDF or SMILES text file")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise SaltplanError(f"file '{upload.filename}' is not UTF-8 text (byte {exc.start})") from None


def create_app(token: str | None = None, jobs_root: str | Path | None = None) -> Starlette:
    """The ASGI application. ``token``: required on every request when set (non-local bind);
    ``jobs_root``: folder for portfolio uploads (default: a new temporary folder)."""
    wb = Workbench(Path(jobs_root) if jobs_root else None)

    async def home(request: Request):
        q = request.query_params.get("q", "")[:500].strip()
        mode = request.query_params.get("mode", "name")
        if mode not in ("name", "substructure", "similarity"):
            mode = "name"
        items, error = [], None
        for item in wb.store.all():
            score = None
            if not q:
                score = 1.0
            elif mode == "name":
                score = 1.0 if q.lower() in (item.name or "").lower() else None
            else:
                try:
                    score = matches(item.structure.smiles, q, mode)
                except SaltplanError as exc:
                    error = exc.one_line()
                    break
            if score is not None:
                items.append((score, item))
        items.sort(key=lambda t: -t[0]) if mode == "similarity" else None
        return wb.page(request, "home.html.j2", items=items, q=q, mode=mode, error=error,
                       jobs=wb.jobs.all())

    async def new_compound(request: Request):
        if request.method == "GET":
            return wb.page(request, "new.html.j2", error=None, values={})
        form = await wb.form(request)
        name = str(form.get("name") or "").strip()[:200]
        text = str(form.get("structure") or "")
        upload = form.get("file")
        values = {"name": name, "structure": text[:MAX_STRUCTURE_CHARS]}
        try:
            if upload is not None and getattr(upload, "filename", ""):
                text = await _text_of_upload(upload)
            parent = parent_from_text(text, name or None)
        except SaltplanError as exc:
            return wb.page(request, "new.html.j2", status=422, error=exc.one_line(), values=values)
        item = wb.store.add(name or parent.name or parent.formula, parent)
        _replan(item)
        return RedirectResponse(f"/c/{item.id}", status_code=303)

    async def compound_page(request: Request):
        item = wb.compound(request)
        return wb.page(request, "compound.html.j2", c=item, error=None,
                       routes=ROUTES_OF_ADMIN, body=_body(item))

    async def compound_inputs(request: Request):
        item = wb.compound(request)
        form = await wb.form(request)
        error = None
        try:
            inputs = _inputs_from_form(form)
            _replan(item, inputs)
            item.inputs = inputs
        except SaltplanError as exc:
            error = exc.one_line()
        except ValueError as exc:
            error = str(exc)
        if request.headers.get("hx-request"):
            return wb.page(request, "plan_area.html.j2", c=item, error=error, body=_body(item),
                           status=200)
        if error:
            return wb.page(request, "compound.html.j2", status=422, c=item, error=error,
                           routes=ROUTES_OF_ADMIN, body=_body(item))
        return RedirectResponse(f"/c/{item.id}", status_code=303)

    async def screen_page(request: Request):
        item = wb.compound(request)
        error = None
        if request.method == "POST":
            form = await wb.form(request)
            try:
                item.screen_form = _screen_form(form, item)
                item.screen_dict = _design(item, item.screen_form)
                item.wells = WellBook()
            except SaltplanError as exc:
                error = exc.one_line()
            except ValueError as exc:
                error = str(exc)
            if request.headers.get("hx-request"):
                return wb.page(request, "screen_area.html.j2", c=item, error=error,
                               body=_body(item) if item.screen_dict and not error else None)
        return wb.page(request, "screen.html.j2", c=item, error=error,
                       status=422 if error and not request.headers.get("hx-request") else 200,
                       body=_body(item) if item.screen_dict and not error else None,
                       ions=_ions(item))

    def screened(request: Request):
        item = wb.compound(request)
        if item.screen_dict is None:
            raise HTTPException(404, "design the screen first: this compound has no screen yet")
        if item.wells is None:
            item.wells = WellBook()
        return item

    def well_ctx(item, well: dict, values=None, version=None, error=None, saved=False):
        rec = item.wells.get(str(well["well"]))
        return {"w": well, "values": rec.values if values is None else values,
                "version": rec.version if version is None else version, "error": error,
                "saved": saved, "fid": "well-" + str(well["well"])}

    async def results_page(request: Request):
        item = screened(request)
        wells = [well_ctx(item, w) for w in item.screen_dict["wells"]]
        return wb.page(request, "results.html.j2", c=item, wells=wells, outcomes=_OUTCOMES,
                       upload_error=None, loaded=None)

    async def results_upload(request: Request):
        item = screened(request)
        form = await wb.form(request)
        upload = form.get("file")
        error, loaded = None, None
        if upload is None or not getattr(upload, "filename", ""):
            error = "choose a results file (CSV) to upload"
        else:
            data = await upload.read(MAX_BODY_BYTES + 1)
            try:
                loaded = item.wells.load_file(item.screen_dict, data, _safe_stem(upload.filename))
            except SaltplanError as exc:
                error = exc.one_line()
        wells = [well_ctx(item, w) for w in item.screen_dict["wells"]]
        return wb.page(request, "results.html.j2", status=422 if error else 200, c=item,
                       wells=wells, outcomes=_OUTCOMES, upload_error=error, loaded=loaded)

    async def well_save(request: Request):
        item = screened(request)
        name = request.path_params["well"]
        well = next((w for w in item.screen_dict["wells"] if str(w["well"]) == name), None)
        if well is None:
            raise HTTPException(404, "no such well in this screen")
        form = await wb.form(request)
        values = {f: str(form.get(f) or "")[:2000] for f in FIELDS}
        try:
            version = int(str(form.get("version") or "0"))
        except ValueError:
            version = -1
        status = 200
        try:
            rec = item.wells.save(item.screen_dict, name, values, version)
            ctx = well_ctx(item, well, saved=True)
            del rec
        except Conflict as exc:
            ctx = well_ctx(item, well, values=values, version=version, error=str(exc))
            status = 409
        except SaltplanError as exc:
            ctx = well_ctx(item, well, values=values, version=version, error=exc.one_line())
            status = 422
        if request.headers.get("hx-request"):
            # htmx swaps 2xx only: the refusal is shown in place, the status says so
            resp = wb.page(request, "well_form.html.j2", c=item, outcomes=_OUTCOMES, **ctx)
            resp.headers["x-saltplan-status"] = str(status)
            return resp
        if status != 200:
            wells = [ctx if w["well"] == well["well"] else well_ctx(item, w)
                     for w in item.screen_dict["wells"]]
            return wb.page(request, "results.html.j2", status=status, c=item, wells=wells,
                           outcomes=_OUTCOMES, upload_error=None, loaded=None)
        return RedirectResponse(f"/c/{item.id}/results#well-{name}", status_code=303)

    def selection_of(item):
        from ..select import evaluate_results
        from ..select.results import parse_results

        problem = not_ready(item.wells)
        if problem:
            raise problem
        results = parse_results(item.wells.results_csv(item.screen_dict), item.screen_dict,
                                origin="workbench results")
        return evaluate_results(item.screen_dict, results,
                                dose_mg=(item.inputs or {}).get("dose_mg"))

    async def decision_page(request: Request):
        item = screened(request)
        try:
            sel = selection_of(item).to_dict()
            error = None
        except SaltplanError as exc:
            sel, error = None, exc.one_line()
        return wb.page(request, "decision.html.j2", c=item, sel=sel, error=error)

    async def decision_download(request: Request):
        from ..reports.decision import render_decision_html, render_decision_markdown

        item = screened(request)
        kind = request.path_params["kind"]
        try:
            sel = selection_of(item)
        except SaltplanError as exc:
            raise HTTPException(409, exc.one_line()) from None
        stem = _safe_stem(item.name)
        if kind == "decision.html":
            body, mt = render_decision_html(sel), "text/html"
        elif kind == "decision.md":
            body, mt = render_decision_markdown(sel), "text/markdown"
        elif kind == "results.csv":
            body, mt = item.wells.results_csv(item.screen_dict), "text/csv"
        else:
            raise HTTPException(404, "no such download")
        return Response(body, media_type=mt, headers={
            "content-disposition": f'attachment; filename="{stem}-{kind}"'})

    async def download(request: Request):
        from ..reports import render_plan_html, render_plan_json, render_plan_markdown

        item = wb.compound(request)
        kind = request.path_params["kind"]
        screen = item.screen_dict
        stem = _safe_stem(item.name)
        if kind == "report.html":
            body, mt = render_plan_html(item.plan_dict, screen), "text/html"
        elif kind == "report.md":
            body, mt = render_plan_markdown(item.plan_dict, screen), "text/markdown"
        elif kind == "plan.json":
            body, mt = render_plan_json(item.plan_dict, screen), "application/json"
        elif kind == "worksheet.csv" and screen is not None:
            body, mt = _worksheet_csv(item), "text/csv"
        else:
            raise HTTPException(404, "no such download")
        return Response(body, media_type=mt, headers={
            "content-disposition": f'attachment; filename="{stem}-{kind}"'})

    async def portfolio_page(request: Request):
        error = None
        if request.method == "POST":
            form = await wb.form(request)
            upload = form.get("file")
            column = str(form.get("smiles_column") or "smiles").strip()[:100] or "smiles"
            if upload is None or not getattr(upload, "filename", ""):
                error = "choose a CSV or SDF file of candidates to upload"
            else:
                data = await upload.read(MAX_BODY_BYTES + 1)
                try:
                    job = wb.jobs.submit(data, upload.filename, column)
                    return RedirectResponse(f"/p/{job.id}", status_code=303)
                except SaltplanError as exc:
                    error = exc.one_line()
        return wb.page(request, "portfolio.html.j2", status=422 if error else 200,
                       error=error, jobs=wb.jobs.all(), max_rows=MAX_ROWS)

    def table_args(request: Request) -> dict:
        qp = request.query_params
        try:
            page = int(qp.get("page", "1"))
        except ValueError:
            page = 1
        return {"sort": qp.get("sort", "row"), "desc": qp.get("dir") == "desc",
                "verdict": qp.get("verdict", "")[:40], "q": qp.get("q", "")[:200].strip(),
                "page": page}

    async def job_page(request: Request):
        from .jobs import table

        job = wb.job(request)
        args = table_args(request)
        view = table(job, **args) if not job.running else None

        def qs(**changes) -> str:
            from urllib.parse import urlencode

            cur = {"sort": view["sort"] if view else "row",
                   "dir": "desc" if args["desc"] else "asc", "verdict": args["verdict"],
                   "q": args["q"], "page": view["page"] if view else 1, **changes}
            return f"/p/{job.id}?" + urlencode({k: v for k, v in cur.items() if v not in ("", None)})

        return wb.page(request, "job.html.j2", job=job, t=view, exports=EXPORTS, qs=qs,
                       columns=PORTFOLIO_COLUMNS)

    async def job_progress(request: Request):
        job = wb.job(request)
        resp = wb.page(request, "job_progress.html.j2", job=job)
        if not job.running:
            resp.headers["hx-refresh"] = "true"        # the finished page shows the table
        return resp

    async def job_stop(request: Request):
        job = wb.job(request)
        await wb.form(request)
        wb.jobs.stop(job)
        return RedirectResponse(f"/p/{job.id}", status_code=303)

    async def job_thumb(request: Request):
        from .jobs import thumbnail

        job = wb.job(request)
        try:
            row = int(request.path_params["row"])
        except ValueError:
            raise HTTPException(404, "no such row") from None
        svg = thumbnail(job, row)
        if svg is None:
            raise HTTPException(404, "no drawing for this row")
        return Response(svg, media_type="image/svg+xml")

    async def job_download(request: Request):
        from .jobs import export

        job = wb.job(request)
        kind = request.path_params["kind"]
        if kind not in EXPORTS:
            raise HTTPException(404, "no such download")
        if job.running:
            raise HTTPException(409, "the run is not finished yet")
        try:
            body = export(job, kind)
        except SaltplanError as exc:
            raise HTTPException(409, exc.one_line()) from None
        return Response(body, media_type=EXPORTS[kind], headers={
            "content-disposition": f'attachment; filename="{_safe_stem(job.name)}-{kind}"'})

    async def report_css(request: Request):
        css = wb.env.get_template("partials/style.css.j2").render()
        return Response(css, media_type="text/css")

    async def http_error(request: Request, exc: HTTPException):
        return wb.page(request, "error.html.j2", status=exc.status_code, status_code=exc.status_code,
                       message=exc.detail)

    routes = [
        Route("/", home),
        Route("/new", new_compound, methods=["GET", "POST"]),
        Route("/c/{cid}", compound_page),
        Route("/c/{cid}/inputs", compound_inputs, methods=["POST"]),
        Route("/c/{cid}/screen", screen_page, methods=["GET", "POST"]),
        Route("/c/{cid}/download/{kind}", download),
        Route("/c/{cid}/results", results_page),
        Route("/c/{cid}/results/upload", results_upload, methods=["POST"]),
        Route("/c/{cid}/results/well/{well}", well_save, methods=["POST"]),
        Route("/c/{cid}/decision", decision_page),
        Route("/c/{cid}/decision/download/{kind}", decision_download),
        Route("/portfolio", portfolio_page, methods=["GET", "POST"]),
        Route("/p/{job}", job_page),
        Route("/p/{job}/progress", job_progress),
        Route("/p/{job}/stop", job_stop, methods=["POST"]),
        Route("/p/{job}/thumb/{row}.svg", job_thumb),
        Route("/p/{job}/download/{kind}", job_download),
        Route("/report.css", report_css),
        Mount("/static", StaticFiles(directory=str(HERE / "static")), name="static"),
    ]
    @contextlib.asynccontextmanager
    async def lifespan(_app):
        yield
        wb.jobs.close()                  # stop portfolio workers, remove their folders

    app = Starlette(routes=routes, exception_handlers={HTTPException: http_error},
                    lifespan=lifespan)
    app.state.workbench = wb
    app.add_middleware(SecurityHeaders)
    app.add_middleware(TokenGate, token=token)
    app.add_middleware(BodyLimit, limit=MAX_BODY_BYTES)
    return app


def _safe_stem(name: str) -> str:
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", name or "compound").strip("._") or "compound"
    return stem[:60]


def _number(form, key, what, low=None, high=None):
    raw = str(form.get(key) or "").strip()
    if not raw:
        return None
    try:
        value = float(raw)
    except ValueError:
        raise ValueError(f"{what}: '{raw[:40]}' is not a number") from None
    if value != value or (low is not None and value < low) or (high is not None and value > high):
        raise ValueError(f"{what}: {raw[:40]} is outside {low:g} to {high:g}")
    return value


def _inputs_from_form(form) -> dict:
    from ..ionization.measured import parse_measured

    pka_text = str(form.get("pka") or "").strip()[:500]
    measured = parse_measured([p for p in re.split(r"[,;\s]+", pka_text) if p]) if pka_text else None
    route = str(form.get("route") or "oral")
    if route not in ROUTES_OF_ADMIN:
        raise ValueError(f"route: '{route[:40]}' is not one of {', '.join(ROUTES_OF_ADMIN)}")
    return {
        "pka": pka_text,
        "measured": measured,
        "dose_mg": _number(form, "dose_mg", "daily dose [mg]", 0.0, 1e5),
        "route": route,
        "melting_point_c": _number(form, "melting_point_c", "melting point [°C]", -50.0, 500.0),
        "intrinsic_solubility_mg_ml": _number(form, "s0", "intrinsic solubility [mg/mL]", 0.0, 1e4),
    }


def _replan(item, inputs: dict | None = None) -> None:
    from ..plan import plan_salts

    inputs = inputs if inputs is not None else item.inputs
    plan = plan_salts(item.structure, name=item.name, dose_mg=inputs.get("dose_mg"),
                      route=inputs.get("route") or "oral", measured=inputs.get("measured"),
                      melting_point_c=inputs.get("melting_point_c"),
                      intrinsic_solubility_mg_ml=inputs.get("intrinsic_solubility_mg_ml"))
    item.plan, item.plan_dict = plan, plan.to_dict()
    item.screen_dict = None          # a new plan makes the old screen stale


def _ions(item) -> list[dict]:
    seen, out = set(), []
    for c in (item.plan_dict or {}).get("candidates", []):
        cid = c.get("counterion")
        if cid and cid not in seen:
            seen.add(cid)
            out.append({"id": cid, "name": c.get("counterion_name") or cid})
    return out


def _screen_form(form, item) -> dict:
    known = {i["id"] for i in _ions(item)}
    chosen = [str(v) for v in form.getlist("counterion") if str(v) in known]
    budget = _number(form, "budget_mg", "API budget [mg]", 0.0, 1e6)
    if budget is None:
        raise ValueError("API budget [mg]: give the amount of API available for the screen")
    n_solv = _number(form, "n_solvents", "number of solvents", 1, 12)
    return {"counterions": chosen, "budget_mg": budget,
            "n_solvents": int(n_solv) if n_solv else None}


def _design(item, f: dict) -> dict:
    from ..screen import design_screen

    design = design_screen(item.plan, f["budget_mg"], counterions=f["counterions"] or None,
                           n_solvents=f["n_solvents"])
    return design.to_dict()


def _worksheet_csv(item) -> str:
    from .._io import csv_text

    wells = item.screen_dict.get("wells", [])
    if not wells:
        return ""
    keys = [k for k, v in wells[0].items() if not isinstance(v, (dict, list))]
    return csv_text([keys, *([row.get(k) for k in keys] for row in wells)])


def _body(item) -> str:
    """The report body (the report templates' partial) for the plan and screen."""
    from ..reports import render_plan_body

    return render_plan_body(item.plan_dict, item.screen_dict)
