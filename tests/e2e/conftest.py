"""Browser tests: the real app served on loopback, driven by a real headless Chromium.

- ``live_server`` (one per run): uvicorn in a background thread on a free 127.0.0.1 port,
  serving ``create_app`` built from a factory with its own Settings.
- ``live_db`` (one per test): a fresh copy of the migrated SQLite template (the four test users
  with ``PASSWORDS`` included) that the running app is switched to for the test, so every test
  starts from the same empty laboratory. ``db`` and ``people`` name the same database and its
  users here, so seed it through the services as elsewhere: ``small_job(db, people.admin)``.
- ``page``: a new browser context and page at 768 x 1024 (a tablet held upright); ``new_page``
  opens more (another person, another viewport); ``turn_landscape(page)`` gives 1024 x 768.
- On a failed test every open page is saved as a full-page PNG in ``test-artifacts/``.
- ``serious_violations(page)``: axe-core's serious and critical accessibility violations.

Without Chromium the folder is skipped with the reason, unless CLAYBENCH_REQUIRE_BROWSER=1
(as in CI), where that fails instead.
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import threading
import time
import urllib.request
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
import uvicorn
from fastapi import FastAPI
from playwright.sync_api import Browser, BrowserContext, Page, Playwright, sync_playwright
from sqlmodel import select

from server.config import Settings
from server.db.session import Database
from server.db.tables import User
from server.main import create_app
from tests.conftest import PEOPLE, People

CHROMIUM = Path(os.environ.get("CLAYBENCH_CHROMIUM", "/usr/bin/chromium"))
REQUIRE_ENV = "CLAYBENCH_REQUIRE_BROWSER"
HERE = Path(__file__).resolve().parent

TABLET_PORTRAIT = {"width": 768, "height": 1024}
TABLET_LANDSCAPE = {"width": 1024, "height": 768}

# STACK-NOTES "Browsers in tests": as root Chromium needs --no-sandbox, and these keep it from
# calling out to the (closed) network. Playwright adds a fresh --user-data-dir of its own to
# every launch (it refuses one given in args), removed when the browser closes.
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--headless",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]

_PAGES = pytest.StashKey[list[BrowserContext]]()


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Mark every test of this folder ``browser``; skip them all when there is no Chromium."""
    missing = not CHROMIUM.exists()
    for item in items:
        if HERE not in item.path.parents:
            continue
        item.add_marker(pytest.mark.browser)
        if missing and os.environ.get(REQUIRE_ENV) != "1":
            item.add_marker(
                pytest.mark.skip(
                    reason=f"no Chromium at {CHROMIUM} (apt-get install chromium); browser tests skipped"
                )
            )


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo[None]) -> Iterator[Any]:
    """When a test fails, save every page it has open as test-artifacts/<test name>[-n].png."""
    report: pytest.TestReport = yield
    if report.failed and report.when in ("setup", "call"):
        pages = [p for ctx in item.stash.get(_PAGES, []) for p in ctx.pages if not p.is_closed()]
        folder = item.config.rootpath / "test-artifacts"
        folder.mkdir(exist_ok=True)
        name = re.sub(r"[^A-Za-z0-9_.-]+", "_", item.name).strip("_")
        for i, p in enumerate(pages):
            path = folder / (f"{name}.png" if i == 0 else f"{name}-{i + 1}.png")
            try:
                p.screenshot(path=str(path), full_page=True)
            except Exception as exc:  # noqa: BLE001 - a failed screenshot must not hide the failure
                report.sections.append(("screenshot", f"could not save {path}: {exc}"))
            else:
                report.sections.append(("screenshot", f"saved {path}"))
    return report


@dataclass
class LiveServer:
    """The app served on loopback: its base URL and the app object (to switch its database)."""

    url: str
    app: FastAPI
    base_db: Database


def _wait_until_healthy(url: str, thread: threading.Thread, timeout_s: float = 20.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if not thread.is_alive():
            raise RuntimeError("the test server stopped while starting")
        try:
            with urllib.request.urlopen(f"{url}/healthz", timeout=2) as reply:
                if reply.status == 200:
                    return
        except OSError:
            time.sleep(0.05)
    raise RuntimeError(f"the test server did not answer {url}/healthz within {timeout_s:g} s")


@pytest.fixture(scope="session")
def live_server(tmp_path_factory: pytest.TempPathFactory, sqlite_template: Path) -> Iterator[LiveServer]:
    """uvicorn serving the app on a free loopback port, in a background thread, for the whole run."""
    folder = tmp_path_factory.mktemp("live")
    path = folder / "claybench.sqlite3"
    shutil.copy(sqlite_template, path)
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.bind(("127.0.0.1", 0))
    url = f"http://127.0.0.1:{sock.getsockname()[1]}"
    settings = Settings(
        data_dir=folder / "data",
        DATABASE_URL=f"sqlite:///{path}",
        secret_key="e" * 48,
        public_base_url=url,
    )
    db = Database(settings.database_url)
    made: list[FastAPI] = []

    def factory() -> FastAPI:
        made.append(create_app(settings, db))
        return made[-1]

    config = uvicorn.Config(
        factory, factory=True, log_level="warning", access_log=False, ws="none", lifespan="off"
    )
    server = uvicorn.Server(config)
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, name="live-server", daemon=True)
    thread.start()
    try:
        _wait_until_healthy(url, thread)
        yield LiveServer(url, made[0], db)
    finally:
        server.should_exit = True
        thread.join(timeout=10)
        sock.close()
        db.dispose()


@pytest.fixture
def live_db(live_server: LiveServer, sqlite_template: Path, tmp_path: Path) -> Iterator[Database]:
    """A fresh laboratory (users only) that the live server uses for this one test."""
    path = tmp_path / "e2e.sqlite3"
    shutil.copy(sqlite_template, path)
    db = Database(f"sqlite:///{path}")
    live_server.app.state.db = db
    try:
        yield db
    finally:
        live_server.app.state.db = live_server.base_db
        db.dispose()


@pytest.fixture
def db(live_db: Database) -> Database:
    """In a browser test ``db`` is the live server's database (and so ``people`` its users)."""
    return live_db


@pytest.fixture
def live_people(live_db: Database) -> People:
    """The four users of the live database (tech, review, review2, admin), for seeding."""
    with live_db.session() as s:
        found = {u.username: u for u in s.exec(select(User))}
    return People(**{name: found[name] for name, _ in PEOPLE})


@pytest.fixture(scope="session")
def playwright_driver() -> Iterator[Playwright]:
    if not CHROMIUM.exists():
        pytest.fail(f"{REQUIRE_ENV}=1 but there is no Chromium at {CHROMIUM}: apt-get install chromium")
    with sync_playwright() as driver:
        yield driver


@pytest.fixture(scope="session")
def chromium(playwright_driver: Playwright) -> Iterator[Browser]:
    browser = playwright_driver.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
    yield browser
    browser.close()


@pytest.fixture
def new_page(
    request: pytest.FixtureRequest, chromium: Browser, live_server: LiveServer, live_db: Database
) -> Iterator[Callable[..., Page]]:
    """Open a page in a context of its own (own cookies: another person); closed after the test."""
    contexts: list[BrowserContext] = []
    request.node.stash[_PAGES] = contexts

    def open_page(viewport: dict[str, int] | None = None) -> Page:
        context = chromium.new_context(
            base_url=live_server.url, viewport=viewport or TABLET_PORTRAIT, locale="en-GB", timezone_id="UTC"
        )
        context.set_default_timeout(10_000)
        contexts.append(context)
        return context.new_page()

    yield open_page
    for context in contexts:
        context.close()


@pytest.fixture
def page(new_page: Callable[..., Page]) -> Page:
    """A page at 768 x 1024, the size of a tablet held upright at the bench."""
    return new_page()


def turn_landscape(page: Page) -> None:
    """The same tablet turned sideways: 1024 x 768."""
    page.set_viewport_size(TABLET_LANDSCAPE)


def sign_in(page: Page, username: str, password: str) -> None:
    """Sign in through the sign-in form and wait until the app has moved on from it."""
    page.goto("/signin")
    page.get_by_label("Username").fill(username)
    page.get_by_label("Password").fill(password)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url(lambda url: "/signin" not in url)


def horizontal_overflow(page: Page) -> int:
    """How many CSS pixels the page is wider than the viewport (0: no sideways scrolling)."""
    return int(page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth"))


def serious_violations(page: Page) -> list[dict[str, Any]]:
    """axe-core's violations of impact serious or critical on the page as it is now."""
    from axe_playwright_python.sync_playwright import Axe

    results = Axe().run(page)
    return [v for v in results.response["violations"] if v.get("impact") in ("serious", "critical")]


def describe(violations: list[dict[str, Any]]) -> str:
    """One line per violation, for an assertion message: rule, impact and the elements."""
    return "\n".join(
        f"{v['id']} ({v['impact']}): {v['help']} at {', '.join(str(n['target']) for n in v['nodes'][:5])}"
        for v in violations
    )
