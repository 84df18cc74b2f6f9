"""The HTTP job API: submit a scenario, follow its progress, fetch its result and report.

Every error is a problem-details body; validation errors name each field path. The API writes
only JSON records to Redis and queues JSON-serialised rq jobs: nothing it sends is pickled.

``create_app`` only assembles the app: its routers (jobs, results, health and metrics, the
shop pages), the error handlers, the request size limit and the API page.
"""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI
from fastapi.responses import HTMLResponse
from redis import Redis
from rq import Queue
from rq.serializers import JSONSerializer

from tuneopt.service import tasks
from tuneopt.service.access import key_guard
from tuneopt.service.jobs import jobs_router
from tuneopt.service.limits import BodyLimit
from tuneopt.service.monitoring import monitoring_router
from tuneopt.service.pages import FORM_PAGES, pages_router
from tuneopt.service.problems import Problem, install_handlers
from tuneopt.service.records import JobStore
from tuneopt.service.results import results_router
from tuneopt.service.settings import Settings
from tuneopt.service.status import JobList, JobStatus
from tuneopt.service.submission import body_schemas

__all__ = ["JobList", "JobStatus", "create_app"]

_ERRORS = {
    status: {"model": Problem, "content": {"application/problem+json": {}}}
    for status in (400, 401, 404, 409, 413, 415, 422, 503)
}
DOCS_ASSETS = "/docs-assets"


def _serve_docs(app: FastAPI) -> None:
    """The interactive API page at /docs, its script and style served by the API itself (the
    default page loads them from an outside network and stays blank offline)."""
    from fastapi.openapi.docs import get_swagger_ui_html
    from fastapi.staticfiles import StaticFiles
    from swagger_ui_bundle import swagger_ui_path

    app.mount(DOCS_ASSETS, StaticFiles(directory=str(swagger_ui_path)), name="docs-assets")

    @app.get("/docs", include_in_schema=False)
    def docs() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url="/openapi.json",
            title="tuneopt job service",
            swagger_js_url=f"{DOCS_ASSETS}/swagger-ui-bundle.js",
            swagger_css_url=f"{DOCS_ASSETS}/swagger-ui.css",
            swagger_favicon_url="data:,",
        )


def _with_components(app: FastAPI, components: dict[str, Any]) -> None:
    """The app's OpenAPI description with the scenario's schemas among its components (the
    submission's body refers to them)."""
    plain_openapi = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema is None:
            schema = plain_openapi()
            known = schema.setdefault("components", {}).setdefault("schemas", {})
            clash = set(known) & set(components)
            assert not clash, f"scenario schemas clash with the API's own: {sorted(clash)}"
            known.update(components)
        return app.openapi_schema  # type: ignore[return-value]

    app.openapi = openapi  # type: ignore[method-assign]


def create_app(settings: Settings) -> FastAPI:
    """The API on the settings' Redis and results folder."""
    tasks.configure(settings)
    url = settings.redis_url.get_secret_value()
    redis = Redis.from_url(url, decode_responses=True)
    raw = Redis.from_url(url)  # rq's payloads are bytes
    store = JobStore(redis, settings.key_prefix)
    queue = Queue(settings.queue, connection=raw, serializer=JSONSerializer)

    app = FastAPI(
        title="tuneopt job service",
        version="1",
        description="Queue damper-tuning studies and fetch their ranked setups. Results are "
        "simulated: stay within the maker's limits and have a qualified technician check any "
        "setting.",
        responses=_ERRORS,  # type: ignore[arg-type]
        docs_url=None,  # served below from files installed with the package: works offline
        redoc_url=None,
    )
    install_handlers(app)
    _serve_docs(app)
    body_schema, form_schema, components = body_schemas()
    _with_components(app, components)
    app.add_middleware(BodyLimit, max_bytes=settings.max_body_bytes, pages=FORM_PAGES)
    guarded = key_guard(settings)
    app.include_router(
        jobs_router(settings, store, queue, raw, guarded, body_schema, form_schema)
    )
    app.include_router(results_router(store, guarded))
    app.include_router(monitoring_router(settings, store, queue, redis))
    app.include_router(pages_router(settings, store))
    return app
