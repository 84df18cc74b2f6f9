"""Pages for a browser: log in once with the API key, the jobs list with its progress, a form to
start a job (a scenario with its side files, a ride log to fit its course to, trials, a
deadline), a job's page with its course fit, its report, its setup sheets and a cancel button.
Served by the job API under ``/shop``; see docs/shop-pages.md."""

from tuneopt.service.pages.router import BASE, FORM_PAGES, pages_router

__all__ = ["BASE", "FORM_PAGES", "pages_router"]
