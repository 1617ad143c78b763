"""A JupyterLab server in a temporary folder and the page helpers the browser tests need.

The server listens on 127.0.0.1 with no token, keeps every Jupyter folder under its own temporary root, turns
the news notification off, and is stopped by its PID (kernels it left behind are found by the connection files
in its own runtime folder and stopped by PID too).
"""

from __future__ import annotations

import itertools
import json
import os
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "notebooks"))
import nbtools  # noqa: E402

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
START_TIMEOUT = 120  # seconds for the server to answer
KERNEL_TIMEOUT = 120_000  # ms for a kernel to start or a notebook to finish running
NO_KERNEL_SPEC = "lgs-no-such-kernel"


class LabServer:
    """``jupyter lab`` serving ``work``; every Jupyter folder under ``root``.

    Parameters
    ----------
    kernels : bool
        False: the server offers no kernel at all (notebooks open with no kernel).
    """

    def __init__(self, root: Path, work: Path, *, kernels: bool = True):
        self.root, self.work, self.kernels = Path(root), Path(work), kernels
        self.work.mkdir(parents=True, exist_ok=True)
        self.env = nbtools.jupyter_env(self.root, kernels=kernels)
        settings = Path(self.env["JUPYTERLAB_SETTINGS_DIR"]) / "@jupyterlab" / "apputils-extension"
        settings.mkdir(parents=True, exist_ok=True)
        # a "news" notification would cover part of the page
        (settings / "notification.jupyterlab-settings").write_text(json.dumps({"fetchNews": "false"}))
        self.proc: subprocess.Popen | None = None
        self.port: int | None = None
        self.log = self.root / "lab.log"

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self) -> LabServer:
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            self.port = s.getsockname()[1]
        cmd = [
            sys.executable,
            "-m",
            "jupyterlab",
            "--no-browser",
            "--ServerApp.ip=127.0.0.1",
            f"--ServerApp.port={self.port}",
            "--ServerApp.port_retries=0",
            "--IdentityProvider.token=",
            "--ServerApp.password=",
            f"--ServerApp.root_dir={self.work}",
            "--LabApp.expose_app_in_browser=True",
        ]
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            cmd.append("--allow-root")
        if not self.kernels:
            cmd.append(f"--KernelSpecManager.allowed_kernelspecs={NO_KERNEL_SPEC}")
        with open(self.log, "w") as log:
            self.proc = subprocess.Popen(
                cmd, env=self.env, stdout=log, stderr=subprocess.STDOUT, cwd=self.work, start_new_session=True
            )
        deadline = time.monotonic() + START_TIMEOUT
        while True:
            if self.proc.poll() is not None:
                raise RuntimeError(f"JupyterLab exited with {self.proc.returncode}:\n{self.log_tail()}")
            try:
                with urllib.request.urlopen(self.url + "/api/status", timeout=2):
                    return self
            except OSError:
                if time.monotonic() > deadline:
                    self.stop()
                    raise RuntimeError(f"JupyterLab did not answer in {START_TIMEOUT} s:\n{self.log_tail()}") from None
                time.sleep(0.25)

    def api(self, path: str):
        with urllib.request.urlopen(self.url + path, timeout=10) as r:
            return json.loads(r.read())

    def log_tail(self, n: int = 4000) -> str:
        return self.log.read_text(errors="replace")[-n:] if self.log.exists() else ""

    def _kernel_pids(self) -> list[int]:
        """PIDs of kernels whose connection file lives in this server's runtime folder."""
        runtime = self.env["JUPYTER_RUNTIME_DIR"]
        pids = []
        for entry in Path("/proc").glob("[0-9]*"):
            try:
                cmdline = (entry / "cmdline").read_bytes().split(b"\0")
            except OSError:
                continue
            if any(arg.decode(errors="replace").startswith(runtime + "/kernel-") for arg in cmdline):
                pids.append(int(entry.name))
        return pids

    def stop(self) -> None:
        """Stop the server by its PID (SIGTERM shuts its kernels down), then any kernel it left."""
        if self.proc is None:
            return
        if self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.kill(self.proc.pid, signal.SIGKILL)
                self.proc.wait(timeout=10)
        for pid in self._kernel_pids():
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        self.proc = None


# -- page helpers ------------------------------------------------------------------------------------------

_CURRENT = "window.jupyterapp && window.jupyterapp.shell.currentWidget"


_WORKSPACES = itertools.count(1)


def open_notebook(page, server: LabServer, name: str, n_cells: int) -> None:
    """Open ``name`` in Lab (in a fresh workspace) and wait until all its cells are in the page."""
    page.goto(f"{server.url}/lab/workspaces/lgs-{next(_WORKSPACES)}/tree/{name}")
    page.wait_for_function("() => window.jupyterapp !== undefined", timeout=KERNEL_TIMEOUT)
    # Lab adds cells progressively: wait until the page holds as many as the notebook
    page.wait_for_function(
        """([name, n]) => {
            const w = window.jupyterapp.shell.currentWidget;
            if (!w || !w.context || w.context.path !== name || !w.content) return false;
            return w.node.querySelectorAll('.jp-Notebook .jp-Cell').length === n;
        }""",
        arg=[name, n_cells],
        timeout=KERNEL_TIMEOUT,
    )


def choose_no_kernel(page) -> None:
    """Answer Lab's "Select Kernel" dialog (shown when the notebook's kernel does not exist) with No Kernel."""
    dialog = page.locator(".jp-Dialog")
    dialog.get_by_role("button", name="No Kernel", exact=True).click(timeout=KERNEL_TIMEOUT)
    dialog.wait_for(state="detached", timeout=30_000)
    page.wait_for_function(
        f"""() => {{ const w = {_CURRENT}; return w && !w.sessionContext.session
            && w.sessionContext.kernelDisplayName === 'No Kernel'; }}""",
        timeout=30_000,
    )


def wait_kernel_idle(page) -> None:
    page.wait_for_function(
        f"""() => {{ const w = {_CURRENT};
            const k = w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel;
            return !!k && k.status === 'idle' && k.connectionStatus === 'connected'; }}""",
        timeout=KERNEL_TIMEOUT,
    )


_ERRORS_JS = f"""() => {{ const w = {_CURRENT};
    return w.content.widgets.map((c, i) => [i, c.model.type === 'code' ? c.model.outputs.toJSON() : []])
        .flatMap(([i, outs]) => outs.filter(o => o.output_type === 'error')
        .map(o => 'cell ' + i + ': ' + o.ename + ': ' + o.evalue)); }}"""


def run_all(page) -> None:
    """Run every cell; wait until each code cell has its execution count and the kernel is idle.

    Lab stops a run at the first error: that error is raised here as an AssertionError.
    """
    page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
    page.wait_for_function(
        f"""() => {{ const w = {_CURRENT};
            const prompts = [...w.node.querySelectorAll('.jp-CodeCell .jp-InputArea-prompt')];
            const done = prompts.length > 0 && prompts.every(p => /\\[\\d+\\]/.test(p.textContent));
            return done || ({_ERRORS_JS})().length > 0; }}""",
        timeout=KERNEL_TIMEOUT,
    )
    wait_kernel_idle(page)
    errors = page.evaluate(_ERRORS_JS)
    assert not errors, "running the notebook in JupyterLab raised: " + "; ".join(errors)


def kernel_name(page) -> str | None:
    return page.evaluate(
        f"""() => {{ const w = {_CURRENT};
            const k = w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel;
            return k ? k.name : null; }}"""
    )


def save(page) -> None:
    page.evaluate("() => window.jupyterapp.commands.execute('docmanager:save')")
    page.wait_for_function(f"() => {{ const w = {_CURRENT}; return w && !w.context.model.dirty; }}", timeout=30_000)


# Blank areas: an output of visible height with no visible text, image, SVG or canvas inside.
BLANK_AREAS_JS = """(selector) => {
    const visible = el => { const r = el.getBoundingClientRect(); const s = getComputedStyle(el);
        return r.width > 2 && r.height > 2 && s.visibility !== 'hidden' && s.display !== 'none'; };
    const blank = [];
    for (const out of document.querySelectorAll(selector)) {
        const r = out.getBoundingClientRect();
        if (r.height <= 8) continue;
        const text = (out.innerText || '').trim();
        const graphic = [...out.querySelectorAll('svg, img, canvas')].some(visible);
        if (!text && !graphic) blank.push({height: Math.round(r.height), html: out.outerHTML.slice(0, 300)});
    }
    return blank;
}"""


def blank_areas(page, selector: str) -> list:
    return page.evaluate(BLANK_AREAS_JS, selector)


def visible_box(locator) -> dict | None:
    """The bounding box of the first match when it is visible and not tiny, else None."""
    if locator.count() == 0:
        return None
    first = locator.first
    if not first.is_visible():
        return None
    box = first.bounding_box()
    return box if box and box["width"] > 20 and box["height"] > 10 else None
