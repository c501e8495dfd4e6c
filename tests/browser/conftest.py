"""Fixtures for the end-to-end tests in headless Chromium (Voila, JupyterLab, the report).

The browser is Debian's ``/usr/bin/chromium`` driven by the ``playwright`` Python
package (playwright's own browser download does not work offline). Without either,
the tests skip with the reason, unless ``FXNET_REQUIRE_TOOLS=1`` (CI), where a
missing tool is a failure.

Servers (Voila, JupyterLab) run in their own process group on a free loopback
port, are declared ready when a static file answers, and are stopped by their PID.
Every request that leaves loopback is aborted (see :func:`new_page`). Screenshots
go to ``$FXNET_ARTIFACTS`` or, by default, a pytest temporary directory.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit

import pytest
from fxkernel import run_code
from fxtools import missing

CHROMIUM = Path(os.environ.get("FXNET_CHROMIUM", "/usr/bin/chromium"))
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-quic",
]
HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
#: where downloaded JavaScript bundles are kept between runs
BUNDLE_CACHE = Path(os.environ.get("FXNET_BUNDLE_CACHE", Path.home() / ".cache" / "fxnet-widgets" / "widget-bundles"))
LOOPBACK = {"127.0.0.1", "localhost", "::1", "[::1]"}
#: schemes that never leave the machine
LOCAL_SCHEMES = {"file", "data", "blob", "about", "chrome-error"}


def free_port() -> int:
    """A TCP port on 127.0.0.1 that was free a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def is_local(url: str) -> bool:
    """Whether a request to ``url`` stays on this machine."""
    parts = urlsplit(url)
    if parts.scheme in LOCAL_SCHEMES:
        return True
    return (parts.hostname or "") in LOOPBACK


class Server:
    """A server process in its own process group, its log, and its base URL."""

    #: the notebook the server opens (a path relative to its notebook dir), if any
    notebook: str = ""
    #: the server's Jupyter runtime directory (kernel connection files)
    runtime: Path = Path()

    def __init__(self, name: str, argv: list[str], port: int, log: Path, cwd: Path, env: dict[str, str]) -> None:
        self.name, self.port, self.log_path = name, port, log
        self.base = f"http://127.0.0.1:{port}"
        self._log = open(log, "wb")  # closed in stop()
        self.proc = subprocess.Popen(
            argv, cwd=cwd, env=env, stdout=self._log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
            start_new_session=True,
        )  # fmt: skip

    def log_tail(self, n: int = 3000) -> str:
        """The end of the server's log (for failure messages)."""
        self._log.flush()
        return self.log_path.read_text(errors="replace")[-n:]

    def wait_ready(self, path: str, timeout: float = 60.0) -> None:
        """Poll ``path`` (a static file) until it answers 200; fail with the log otherwise."""
        deadline = time.monotonic() + timeout
        url = self.base + path
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                pytest.fail(f"{self.name} exited with code {self.proc.returncode}:\n{self.log_tail()}", pytrace=False)
            try:
                with urllib.request.urlopen(url, timeout=2) as r:
                    if r.status == 200:
                        return
            except (urllib.error.URLError, OSError):
                pass
            time.sleep(0.2)
        self.stop()
        pytest.fail(f"{self.name} did not answer {url} within {timeout:.0f} s:\n{self.log_tail()}", pytrace=False)

    def stop(self) -> None:
        """Stop the whole process group (the server and its kernels), by the server's PID."""
        if self.proc.poll() is None:
            try:
                os.killpg(self.proc.pid, signal.SIGTERM)
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                pass
            except ProcessLookupError:
                pass
        try:  # whatever is left of the group (a kernel that ignored SIGTERM)
            os.killpg(self.proc.pid, signal.SIGKILL)
        except (ProcessLookupError, PermissionError):
            pass
        if self.proc.poll() is None:
            self.proc.wait(timeout=10)
        self._log.close()


def _server_env(home: Path) -> dict[str, str]:
    env = dict(os.environ)
    # keep Jupyter's runtime files and settings out of the user's home
    env["JUPYTER_RUNTIME_DIR"] = str(home / "runtime")
    env["IPYTHONDIR"] = str(home / "ipython")
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), *filter(None, [env.get("PYTHONPATH")])])
    env.pop("FXNET_ARTIFACTS", None)
    return env


# -- tools ---------------------------------------------------------------------------------
@pytest.fixture(scope="session")
def playwright_api() -> Any:
    """The ``playwright.sync_api`` module, or a skip (a failure in CI) without it."""
    try:
        from playwright import sync_api
    except ImportError:
        missing("the Python package playwright is not installed (pip install playwright)")
    return sync_api


@pytest.fixture(scope="session")
def chromium_available(playwright_api: Any) -> Any:
    """Skip (or fail in CI) early when the browser is missing; servers need not start then."""
    if not CHROMIUM.exists():
        missing(f"{CHROMIUM} is not installed (apt-get install chromium)")
    return playwright_api


# module scope: playwright's sync API keeps an asyncio loop running in this thread while it
# is started, and later tests (widgets) run their own loops with asyncio.run
@pytest.fixture(scope="module")
def browser(chromium_available: Any) -> Iterator[Any]:
    """Debian's headless Chromium, launched once per test module."""
    pw = chromium_available.sync_playwright().start()
    try:
        b = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
    except Exception as exc:
        pw.stop()
        pytest.fail(f"{CHROMIUM} did not start: {exc}", pytrace=False)
    yield b
    b.close()
    pw.stop()


@pytest.fixture(scope="session")
def artifacts(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Where screenshots go: ``$FXNET_ARTIFACTS`` or a temporary directory (never the repository)."""
    env = os.environ.get("FXNET_ARTIFACTS")
    path = Path(env) if env else tmp_path_factory.mktemp("browser-artifacts")
    path.mkdir(parents=True, exist_ok=True)
    return path


@dataclass
class PageLog:
    """What a page did: console errors, page errors, requests blocked for leaving loopback."""

    console_errors: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    blocked: list[str] = field(default_factory=list)

    def errors(self) -> list[str]:
        """Console errors and uncaught page errors together."""
        return self.console_errors + self.page_errors


@pytest.fixture
def new_page(browser: Any) -> Iterator[Callable[..., tuple[Any, PageLog]]]:
    """Make pages in fresh contexts; every request leaving loopback is aborted and logged.

    ``page, log = new_page(java_script_enabled=True, viewport=...)``.
    """
    contexts: list[Any] = []

    def make(**options: Any) -> tuple[Any, PageLog]:
        options.setdefault("viewport", {"width": 1500, "height": 1100})
        ctx = browser.new_context(**options)
        contexts.append(ctx)
        log = PageLog()

        def route(r: Any) -> None:
            if is_local(r.request.url):
                r.continue_()
            else:
                log.blocked.append(r.request.url)
                r.abort()

        ctx.route("**/*", route)
        ctx.set_default_timeout(30_000)
        page = ctx.new_page()
        page.on("console", lambda m: log.console_errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: log.page_errors.append(str(e)))
        return page, log

    yield make
    for ctx in contexts:
        ctx.close()


# -- servers -------------------------------------------------------------------------------
def _module_available(name: str) -> bool:
    import importlib.util

    return importlib.util.find_spec(name) is not None


def _voila(tmp_path_factory: pytest.TempPathFactory, notebook: Path) -> Iterator[Server]:
    if not _module_available("voila"):
        missing("voila is not installed (pip install -e '.[lab]')")
    home = tmp_path_factory.mktemp("voila-home")
    (home / "runtime").mkdir()
    port = free_port()
    argv = [
        sys.executable, "-m", "voila", str(notebook), "--no-browser", f"--port={port}",
        "--Voila.ip=127.0.0.1", "--Voila.port_retries=0", "--show_tracebacks=True",
        f"--Voila.connection_dir_root={home / 'runtime'}",  # its kernels' connection files (kernel_run)
    ]  # fmt: skip
    server = Server("voila", argv, port, home / "voila.log", HERE, _server_env(home))
    server.runtime = home / "runtime"
    try:
        server.wait_ready("/voila/static/voila.js")
        yield server
    finally:
        server.stop()


@pytest.fixture(scope="session")
def voila_server(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Server]:
    """Voila serving ``tests/browser/dashboard.ipynb`` on a free loopback port (only once a browser is there)."""
    yield from _voila(tmp_path_factory, HERE / "dashboard.ipynb")


#: the notebook that sets the plan from Python several times (``test_plan_merge.py``)
MERGE_NOTEBOOK = HERE / "plan_merge.ipynb"


@pytest.fixture(scope="session")
def voila_merge_server(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Server]:
    """Voila serving ``tests/browser/plan_merge.ipynb`` (it runs every cell when the page opens)."""
    yield from _voila(tmp_path_factory, MERGE_NOTEBOOK)


@pytest.fixture(scope="session")
def voila_hardware_server(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Server]:
    """Voila serving ``tests/browser/hardware_section.ipynb`` (an explorer whose hardware section can synthesize)."""
    yield from _voila(tmp_path_factory, HERE / "hardware_section.ipynb")


@pytest.fixture(scope="session")
def notebook_server(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Server]:
    """Notebook 7 on a free loopback port, its own notebook dir holding a copy of ``plan_merge.ipynb``."""
    if not _module_available("notebook"):
        missing("notebook (Notebook 7) is not installed (pip install notebook)")
    home = tmp_path_factory.mktemp("notebook-home")
    nbdir = home / "notebooks"
    nbdir.mkdir()
    shutil.copy(MERGE_NOTEBOOK, nbdir / MERGE_NOTEBOOK.name)
    (home / "assets").symlink_to(ROOT / "assets", target_is_directory=True)
    port = free_port()
    argv = [
        sys.executable, "-m", "jupyter", "notebook", "--no-browser", "--allow-root", f"--port={port}",
        "--ServerApp.ip=127.0.0.1", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
        "--ServerApp.password=", f"--notebook-dir={nbdir}",
    ]  # fmt: skip
    server = Server("jupyter notebook", argv, port, home / "notebook.log", nbdir, _server_env(home))
    server.runtime = home / "runtime"
    try:
        server.wait_ready("/api")
        yield server
    finally:
        server.stop()


def _kernel_run(server: Server, code: str, path: str | None = None, timeout: float = 60.0) -> str:
    """Run ``code`` on the server's kernel (of notebook ``path``, else its newest) with jupyter_client; its stdout.

    The kernel runs requests in the order they arrive, so this also waits until
    the cells queued before it have run.
    """
    import jupyter_client

    kernel_id = None
    if path is not None:
        with urllib.request.urlopen(server.base + "/api/sessions", timeout=10) as r:
            sessions = json.loads(r.read())
        ids = [s["kernel"]["id"] for s in sessions if s.get("path", "").endswith(path) or s.get("name") == path]
        assert ids, f"no kernel session for {path} among {sessions}"
        kernel_id = ids[0]
    files = sorted(Path(server.runtime).glob("**/kernel-*.json"), key=lambda f: f.stat().st_mtime)
    if kernel_id is not None:
        files = [f for f in files if kernel_id in f.name]
    assert files, f"no kernel connection file in {server.runtime}"
    kc = jupyter_client.BlockingKernelClient(connection_file=str(files[-1]))
    kc.load_connection_file()
    kc.start_channels()
    try:
        return run_code(kc, code, timeout)
    finally:
        kc.stop_channels()


@pytest.fixture
def kernel_run() -> Callable[..., str]:
    """``kernel_run(server, code, path=None)``: run ``code`` on the server's kernel, return its stdout."""
    return _kernel_run


def _menu(page: Any, top: str, item: str) -> None:
    """Click ``top`` in the menu bar of JupyterLab or Notebook 7, then ``item`` in its menu."""
    import re

    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(f"^{re.escape(top)}$")).click()
    page.locator(".lm-Menu-itemLabel", has_text=re.compile(f"^{re.escape(item)}$")).click()


@pytest.fixture
def lab_menu() -> Callable[[Any, str, str], None]:
    """``lab_menu(page, "Run", "Run All Cells")``: a menu command in JupyterLab or Notebook 7."""
    return _menu


#: the quick-start notebook the Lab test opens (a copy of it)
QUICK_START = ROOT / "notebooks" / "01-quick-start.ipynb"


@pytest.fixture(scope="session")
def lab_server(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Server]:
    """JupyterLab on a free loopback port, its own notebook dir holding a copy of the quick start (needs a browser)."""
    if not _module_available("jupyterlab"):
        missing("jupyterlab is not installed (pip install -e '.[lab]')")
    if not QUICK_START.exists():
        pytest.fail(f"{QUICK_START.relative_to(ROOT)} is missing: the Lab test opens a copy of it", pytrace=False)
    home = tmp_path_factory.mktemp("lab-home")
    nbdir = home / "notebooks"
    nbdir.mkdir()
    shutil.copy(QUICK_START, nbdir / QUICK_START.name)
    shutil.copy(MERGE_NOTEBOOK, nbdir / MERGE_NOTEBOOK.name)
    # the quick start reads the demo files as ../assets (relative to itself): the copy gets the same
    (home / "assets").symlink_to(ROOT / "assets", target_is_directory=True)
    settings = home / "settings"
    (settings / "@jupyterlab" / "apputils-extension").mkdir(parents=True)
    (settings / "@jupyterlab" / "apputils-extension" / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False})
    )
    # every cell stays in the page (no windowing), so "every code cell ran" can be read from the DOM
    (settings / "@jupyterlab" / "notebook-extension").mkdir(parents=True)
    (settings / "@jupyterlab" / "notebook-extension" / "tracker.jupyterlab-settings").write_text(
        json.dumps({"windowingMode": "none"})
    )
    workspaces = home / "workspaces"
    workspaces.mkdir()
    port = free_port()
    argv = [
        sys.executable, "-m", "jupyter", "lab", "--no-browser", "--allow-root", f"--port={port}",
        "--ServerApp.ip=127.0.0.1", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
        "--ServerApp.password=", "--LabApp.news_url=None", f"--notebook-dir={nbdir}",
        f"--LabApp.user_settings_dir={settings}", f"--LabApp.workspaces_dir={workspaces}",
    ]  # fmt: skip
    env = _server_env(home)
    env["JUPYTERLAB_SETTINGS_DIR"] = str(settings)
    env["JUPYTERLAB_WORKSPACES_DIR"] = str(workspaces)
    server = Server("jupyter lab", argv, port, home / "lab.log", nbdir, env)
    server.notebook = QUICK_START.name
    server.runtime = home / "runtime"
    try:
        server.wait_ready("/static/favicons/favicon.ico")
        yield server
    finally:
        server.stop()


# -- the offline report --------------------------------------------------------------------
@pytest.fixture(scope="session")
def html_manager_dir(chromium_available: Any) -> Path:
    """The html-manager bundle (``dist/embed-amd.js``), fetched once with npm into a user cache."""
    target = BUNDLE_CACHE / "html-manager"
    if (target / "dist" / "embed-amd.js").is_file():
        return target
    if shutil.which("npm") is None:
        missing("npm is not installed (apt-get install npm): it fetches @jupyter-widgets/html-manager")
    BUNDLE_CACHE.mkdir(parents=True, exist_ok=True)
    script = ROOT / "scripts" / "fetch_widget_bundles.sh"
    if script.is_file():
        cmd = ["bash", str(script), str(BUNDLE_CACHE)]
    else:  # same steps as the script, by hand
        cmd = ["bash", "-c", 'cd "$1" && t=$(npm pack --silent @jupyter-widgets/html-manager@1) && '
               'rm -rf html-manager && mkdir html-manager && tar -xzf "$t" -C html-manager --strip-components=1 '
               '&& rm "$t"', "_", str(BUNDLE_CACHE)]  # fmt: skip
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    if done.returncode != 0 or not (target / "dist" / "embed-amd.js").is_file():
        pytest.fail(f"fetching the html-manager failed ({done.returncode}): {done.stderr.strip()[-2000:]}",
                    pytrace=False)  # fmt: skip
    return target


# -- reading the explorer in a page ------------------------------------------------------
#: JavaScript: what the first explorer under ``root`` shows, as plain data
SNAPSHOT_JS = r"""
(rootSel) => {
  const root = document.querySelector(rootSel || '.fxnet-explorer');
  if (!root) return null;
  const figures = {};
  for (const fig of root.querySelectorAll('.bqplot.figure')) {
    const title = (fig.querySelector('.mainheading') || {}).textContent || '';
    const heatmap = fig.querySelector('image.heatmap');
    const svg = fig.querySelector('svg.svg-figure');
    const box = fig.getBoundingClientRect();
    const plot = fig.querySelector('rect.plotarea_background');
    figures[title] = {
      heatmap: heatmap ? heatmap.getAttribute('href') || '' : '',
      svg: svg ? svg.innerHTML : '',
      bars: svg ? svg.querySelectorAll('.bar').length : 0,
      plot_width: +((plot && plot.getAttribute('width')) || 0),
      visible: box.width > 0 && box.height > 0,
    };
  }
  const sliders = {};
  for (const s of root.querySelectorAll('.widget-slider')) {
    const label = s.querySelector('.widget-label');
    const handle = s.querySelector('.noUi-handle');
    if (label && handle) sliders[label.textContent.trim()] = handle.getAttribute('aria-valuenow');
  }
  const metrics = root.querySelector('.fxnet-metrics');
  return {
    figures,
    images: [...root.querySelectorAll('img.widget-image')].map(i => i.getAttribute('src') || ''),
    // each picture by the title shown above it ("fixed-point decision", ...)
    pictures: Object.fromEntries([...root.querySelectorAll('img.widget-image')].map(i => [
      ((i.previousElementSibling || {}).textContent || '').trim(), i.getAttribute('src') || ''])),
    status: ((root.querySelector('.fxnet-status') || {}).textContent || '').trim(),
    // the metrics panel's table as text, one row a line, cells apart by a space
    metrics: metrics ? [...metrics.querySelectorAll('tr')].map(r => [...r.children].map(c =>
      c.innerText.replace(/\n/g, '; ')).join(' ')).join('\n') : '',
    sliders,
  };
}
"""


class ExplorerPage:
    """The explorer in a browser page: snapshots of what it shows, sections, the table-width handle.

    Parameters
    ----------
    page
        A playwright page showing an explorer.
    root
        CSS selector of the explorer (default: the first ``.fxnet-explorer``).
    """

    TABLE_WIDTH = "table width (address bits)"

    def __init__(self, page: Any, root: str = ".fxnet-explorer") -> None:
        self.page, self.root = page, root

    def snapshot(self) -> dict[str, Any]:
        snap = self.page.evaluate(SNAPSHOT_JS, self.root)
        assert snap is not None, f"no element matches {self.root!r}"
        return snap

    def wait_for(self, condition_js: str, arg: Any = None, timeout: float = 60_000) -> None:
        """Wait until ``condition_js`` (``(snap, arg) => bool``) holds for a fresh snapshot."""
        js = f"([root, arg]) => {{ const snap = ({SNAPSHOT_JS})(root); return snap && ({condition_js})(snap, arg); }}"
        try:
            self.page.wait_for_function(js, arg=[self.root, arg], timeout=timeout, polling=100)
        except Exception as exc:
            if type(exc).__name__ != "TimeoutError":
                raise
            snap = self.page.evaluate(SNAPSHOT_JS, self.root) or {}
            figures = {t: {k: (v[:60] if isinstance(v, str) else v) for k, v in f.items()}
                       for t, f in snap.get("figures", {}).items()}  # fmt: skip
            shown = {**snap, "figures": figures, "images": [s[:60] for s in snap.get("images", [])]}
            pytest.fail(f"waited {timeout / 1000:.0f} s for {condition_js} (arg {str(arg)[:200]}); the page shows "
                        f"{json.dumps(shown, indent=1)[:4000]}", pytrace=False)  # fmt: skip

    def wait_drawn(self) -> None:
        """Wait until every figure on screen has a plot area of positive size (a figure created
        in a hidden tab is laid out only once it is shown)."""
        self.wait_for("(s) => Object.values(s.figures).every(f => !f.visible || f.plot_width > 0)")

    def screenshot(self, path: Path) -> None:
        """Save a full-page screenshot once the figures on screen are laid out."""
        self.wait_drawn()
        self.page.wait_for_timeout(300)  # let the last layout paint
        self.page.screenshot(path=str(path), full_page=True)

    def section(self, title: str) -> None:
        """Scroll the explorer section called ``title`` into view (every section is always shown)."""
        head = self.page.locator(f"{self.root} .fxnet-section h3", has_text=title).first
        head.evaluate("h => h.scrollIntoView({block: 'start'})")
        self.page.wait_for_function(
            "([root, title]) => [...document.querySelector(root).querySelectorAll('.fxnet-section h3')]"
            ".some(h => h.textContent.trim() === title && h.getBoundingClientRect().height > 0)",
            arg=[self.root, title],
        )  # fmt: skip

    def slider_handle(self, description: str) -> Any:
        """The noUiSlider handle of the slider whose description is ``description``."""
        row = self.page.locator(f"{self.root} .widget-slider").filter(
            has=self.page.locator(".widget-label", has_text=description)
        )  # fmt: skip
        return row.locator(".noUi-handle").first

    def number_box(self, description: str) -> Any:
        """The number box (a text input: it can show a mix, "18-19") beside the slider called ``description``."""
        label = self.page.locator(f"{self.root} .widget-slider .widget-label", has_text=description).first
        return label.locator(
            "xpath=ancestor::div[contains(concat(' ', @class, ' '), ' widget-slider ')][1]/parent::div"
            "//div[contains(concat(' ', @class, ' '), ' fxnet-number ')]//input"
        ).first


@pytest.fixture
def explorer_page() -> Callable[..., ExplorerPage]:
    """``explorer_page(page, root=".fxnet-explorer")`` -> :class:`ExplorerPage`."""
    return ExplorerPage


@pytest.fixture
def launched_lab(tmp_path: Path, chromium_available: Any) -> Iterator[Server]:
    """JupyterLab started by ``fxnet lab`` (the README's first command) from the project's top directory."""
    settings, workspaces = tmp_path / "settings", tmp_path / "workspaces"
    (settings / "@jupyterlab" / "apputils-extension").mkdir(parents=True)
    (settings / "@jupyterlab" / "apputils-extension" / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False})
    )
    workspaces.mkdir()
    port = free_port()
    argv = [sys.executable, "-m", "fxnet_widgets.cli", "lab", "--no-browser", f"--port={port}", "--",
            "--ServerApp.ip=127.0.0.1", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
            "--ServerApp.password=", "--LabApp.news_url=None", f"--LabApp.user_settings_dir={settings}",
            f"--LabApp.workspaces_dir={workspaces}"]  # fmt: skip
    env = _server_env(tmp_path)
    env["JUPYTERLAB_SETTINGS_DIR"] = str(settings)
    env["JUPYTERLAB_WORKSPACES_DIR"] = str(workspaces)
    server = Server("fxnet lab", argv, port, tmp_path / "lab.log", ROOT, env)
    try:
        server.wait_ready("/static/favicons/favicon.ico", timeout=90)
        yield server
    finally:
        server.stop()
