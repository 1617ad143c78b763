"""A JupyterLab (or Notebook 7) server in a temporary folder and the page helpers the browser tests need.

The server listens on 127.0.0.1 with no token, keeps every Jupyter folder under its own temporary root, turns
the news notification off, and is stopped by its PID (kernels it left behind are found by the connection files
in its own runtime folder and stopped by PID too).
"""

from __future__ import annotations

import contextlib
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

    #: the module run with ``python -m`` and the application class whose options expose the app to the page
    MODULE, APP, NAME = "jupyterlab", "LabApp", "JupyterLab"

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
            self.MODULE,
            "--no-browser",
            "--ServerApp.ip=127.0.0.1",
            f"--ServerApp.port={self.port}",
            "--ServerApp.port_retries=0",
            "--IdentityProvider.token=",
            "--ServerApp.password=",
            f"--ServerApp.root_dir={self.work}",
            f"--{self.APP}.expose_app_in_browser=True",  # window.jupyterapp
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
                raise RuntimeError(f"{self.NAME} exited with {self.proc.returncode}:\n{self.log_tail()}")
            try:
                with urllib.request.urlopen(self.url + "/api/status", timeout=2):
                    return self
            except OSError:
                if time.monotonic() > deadline:
                    self.stop()
                    raise RuntimeError(f"{self.NAME} did not answer in {START_TIMEOUT} s:\n{self.log_tail()}") from None
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


class NotebookServer(LabServer):
    """The Notebook 7 interface (``python -m notebook``), with the same isolation and options as :class:`LabServer`.

    Notebook 7 is built on the same application framework as Lab: with ``expose_app_in_browser`` the page has
    ``window.jupyterapp``, whose ``shell.currentWidget`` is the notebook panel, so the page helpers below work in
    both interfaces (open the notebook with :func:`open_in_notebook`).
    """

    MODULE, APP, NAME = "notebook", "JupyterNotebookApp", "Jupyter Notebook"


# -- the notebook the live tests use, screenshots -----------------------------------------------------------


def live_notebook() -> tuple[Path, list[int]]:
    """The quickstart, else the first notebook (examples first) with a cell that shows the live panel; and the
    indices of those cells."""
    import nbformat
    import pytest

    paths = sorted(nbtools.notebooks_under_test(), key=lambda p: p.name != "quickstart.ipynb")
    for path in paths:
        nb = nbformat.read(path, as_version=4)
        cells = [i for i in nbtools.shown_panels(nb) if not nbtools.static_only(nb.cells[i])]
        if cells:
            return path, cells
    pytest.skip("no notebook shows a live %lagsight panel")


def shot(target, name: str, **options) -> Path:
    """Screenshot of a page or an element into benchmarks/out/screenshots/ (gitignored)."""
    nbtools.SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    path = nbtools.SCREENSHOTS / f"{name}.png"
    target.screenshot(path=str(path), **options)
    return path


def cell_at(page, index: int):
    """Cell ``index`` of the notebook on show (Lab or Notebook 7)."""
    return page.locator(".jp-NotebookPanel:visible .jp-Notebook .jp-Cell").nth(index)


@contextlib.contextmanager
def running(server):
    """The server started, and stopped by its PID on the way out (the module fixtures' one pattern)."""
    try:
        yield server.start()
    finally:
        server.stop()


# -- page helpers ------------------------------------------------------------------------------------------

_CURRENT = "window.jupyterapp && window.jupyterapp.shell.currentWidget"


_WORKSPACES = itertools.count(1)


def _wait_cells(page, name: str, n_cells: int) -> None:
    page.wait_for_function("() => window.jupyterapp !== undefined", timeout=KERNEL_TIMEOUT)
    # the interface adds cells progressively: wait until the page holds as many as the notebook
    page.wait_for_function(
        """([name, n]) => {
            const w = window.jupyterapp.shell.currentWidget;
            if (!w || !w.context || w.context.path !== name || !w.content) return false;
            return w.node.querySelectorAll('.jp-Notebook .jp-Cell').length === n;
        }""",
        arg=[name, n_cells],
        timeout=KERNEL_TIMEOUT,
    )


def open_notebook(page, server: LabServer, name: str, n_cells: int) -> None:
    """Open ``name`` in Lab (in a fresh workspace) and wait until all its cells are in the page."""
    page.goto(f"{server.url}/lab/workspaces/lgs-{next(_WORKSPACES)}/tree/{name}")
    _wait_cells(page, name, n_cells)


def open_in_notebook(page, server: NotebookServer, name: str, n_cells: int) -> None:
    """Open ``name`` in the Notebook 7 interface (its own page, ``/notebooks/<name>``) with all its cells."""
    page.goto(f"{server.url}/notebooks/{name}")
    _wait_cells(page, name, n_cells)


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


RUN_CELL_JS = """i => { const w = window.jupyterapp.shell.currentWidget;
    w.content.activeCellIndex = i;
    const t0 = performance.now();
    void window.jupyterapp.commands.execute('notebook:run-cell');
    return t0; }"""


def run_cell(page, index: int) -> float:
    """Ask to run cell ``index`` of the current notebook (no advance) and return at once, with the page's
    ``performance.now()`` just before the request (wait with :func:`wait_kernel_idle`)."""
    return page.evaluate(RUN_CELL_JS, index)


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


# Sections that open on demand: an ipywidgets Accordion (class lgs-more) whose items are Collapse widgets
COLLAPSE, COLLAPSE_OPEN, COLLAPSE_HEADER = (
    ".jupyter-widget-Collapse",
    "jupyter-widget-Collapse-open",
    (".jupyter-widget-Collapse-header"),
)


def reveal(locator, timeout: float = 30_000) -> None:
    """Make the element visible: open each closed on-demand section (Accordion item) holding it, then scroll
    it into view. Elements outside an Accordion are only scrolled to (the layouts without one work too)."""
    for _ in range(4):  # nested sections, outermost first
        header = locator.evaluate_handle(
            f"""el => {{ const items = []; let c = el.closest('{COLLAPSE}');
                while (c) {{ items.unshift(c); c = c.parentElement && c.parentElement.closest('{COLLAPSE}'); }}
                const closed = items.find(c => !c.classList.contains('{COLLAPSE_OPEN}'));
                return closed ? closed.querySelector(':scope > {COLLAPSE_HEADER}') : null; }}"""
        ).as_element()
        if header is None:
            break
        header.click()
        locator.page.wait_for_function(
            f"h => h.parentElement.classList.contains('{COLLAPSE_OPEN}')", arg=header, timeout=timeout
        )
    locator.scroll_into_view_if_needed(timeout=timeout)


# -- layout checks -----------------------------------------------------------------------------------------
# Each returns a list of findings (empty = fine), so a test asserts ``not findings`` and prints them.

# Shared page code: the visible part of an element's box (clipped by every scrolling or clipping ancestor up
# to a root, or to the window), and the text pieces of a root: DOM text as the client rects of a Range over each
# text node, SVG ``text`` elements as their bounding box, each cut to what its ancestors inside the root let
# show (so the whole root is judged wherever the page is scrolled). Hidden, empty and zero-size pieces are left
# out.
_LAYOUT_LIB = """
const lgsLayout = (() => {
    const shown = el => { for (let e = el; e; e = e.parentElement) { const s = getComputedStyle(e);
        if (s.display === 'none' || s.visibility === 'hidden' || Number(s.opacity) === 0) return false; }
        return true; };
    // the part of the page el can show through: its clipping ancestors' boxes, up to and including `top`
    // (with no `top`, up to the window)
    const clipOf = (el, top) => { let r = top ? {left: -1e9, top: -1e9, right: 1e9, bottom: 1e9}
            : {left: 0, top: 0, right: innerWidth, bottom: innerHeight};
        const stop = top ? top.parentElement : null;
        for (let e = el.parentElement; e && e !== stop; e = e.parentElement) { const s = getComputedStyle(e);
            const b = e.getBoundingClientRect();
            // a zero-size box cannot be what clips a shown child (its children are positioned out of it)
            if ((s.overflowX !== 'visible' || s.overflowY !== 'visible') && b.width > 0 && b.height > 0) {
                r = {left: Math.max(r.left, b.left), top: Math.max(r.top, b.top),
                     right: Math.min(r.right, b.right), bottom: Math.min(r.bottom, b.bottom)}; } }
        return r; };
    const cut = (a, c) => ({left: Math.max(a.left, c.left), top: Math.max(a.top, c.top),
        right: Math.min(a.right, c.right), bottom: Math.min(a.bottom, c.bottom)});
    const area = r => r.right - r.left > 0.5 && r.bottom - r.top > 0.5;
    const label = el => { const c = (el.getAttribute && el.getAttribute('class')) || '';
        return el.tagName.toLowerCase() + (c ? '.' + String(c).trim().split(/\\s+/).slice(0, 3).join('.') : ''); };
    const where = el => { const parts = []; for (let e = el; e && parts.length < 4; e = e.parentElement) {
        const c = (e.getAttribute && e.getAttribute('class')) || '';
        const lgs = String(c).split(/\\s+/).filter(x => x.startsWith('lgs-'));
        if (lgs.length) parts.push(lgs[0]); } return parts.join(' < '); };
    const round = r => ({left: Math.round(r.left), top: Math.round(r.top), width: Math.round(r.right - r.left),
        height: Math.round(r.bottom - r.top)});
    function pieces(root) {
        const out = [];
        const walker = document.createTreeWalker(root, NodeFilter.SHOW_TEXT);
        let id = 0;
        for (let node = walker.nextNode(); node; node = walker.nextNode()) {
            const el = node.parentElement;
            if (!node.textContent.trim() || !el || el.closest('svg, style, script') || !shown(el)) continue;
            const range = document.createRange(); range.selectNodeContents(node);
            const clip = clipOf(el, root); id += 1;
            for (const r of range.getClientRects()) { const v = cut(r, clip);
                if (area(v)) out.push({id, kind: 'dom', el, text: node.textContent.trim().slice(0, 40), box: v,
                    px: parseFloat(getComputedStyle(el).fontSize)}); }
        }
        for (const t of root.querySelectorAll('svg text')) {
            if (!t.textContent.trim() || !shown(t)) continue;
            const v = cut(t.getBoundingClientRect(), clipOf(t, root)); id += 1;
            const ctm = t.getScreenCTM(); const scale = ctm ? Math.hypot(ctm.a, ctm.b) : 1;
            const px = parseFloat(getComputedStyle(t).fontSize) * scale;
            if (area(v)) out.push({id, kind: 'svg', el: t, text: t.textContent.trim().slice(0, 40), box: v, px});
        }
        return out;
    }
    return {shown, clipOf, cut, area, label, where, round, pieces};
})();
"""

OVERLAPPING_TEXT_JS = (
    "([root, tolerance]) => {"
    + _LAYOUT_LIB
    + """
    const ps = lgsLayout.pieces(root), found = [];
    for (let i = 0; i < ps.length; i++) for (let j = i + 1; j < ps.length; j++) {
        const a = ps[i], b = ps[j];
        if (a.id === b.id || a.el.contains(b.el) || b.el.contains(a.el)) continue;
        const w = Math.min(a.box.right, b.box.right) - Math.max(a.box.left, b.box.left);
        const h = Math.min(a.box.bottom, b.box.bottom) - Math.max(a.box.top, b.box.top);
        if (w > tolerance && h > tolerance)
            found.push({a: a.text, b: b.text, overlap: [Math.round(w), Math.round(h)],
                where: [lgsLayout.where(a.el), lgsLayout.where(b.el)], kinds: [a.kind, b.kind]});
        if (found.length >= 25) return found;
    }
    return found;
}"""
)

SMALL_TEXT_JS = (
    "([root, minimum]) => {"
    + _LAYOUT_LIB
    + """
    const seen = new Set(), found = [];
    for (const p of lgsLayout.pieces(root)) {
        if (seen.has(p.id) || p.px >= minimum - 0.05) continue;
        seen.add(p.id);
        found.push({text: p.text, px: Math.round(p.px * 10) / 10, kind: p.kind, where: lgsLayout.where(p.el)});
    }
    return found.slice(0, 25);
}"""
)

# Clipping: an element that scrolls or clips its content sideways, or whose box sticks out of its parent's
# (the panel's own box is held to its output area). Slider parts (handles overhang the track by design) and
# the inside of SVG drawings (judged as a whole) are left out.
CLIPPED_JS = (
    "([root, tolerance]) => {"
    + _LAYOUT_LIB
    + """
    const found = [];
    const all = [root, ...root.querySelectorAll('*')];
    for (const el of all) {
        if (el.closest('.noUi-target') && !el.classList.contains('noUi-target')) continue;
        if (el.parentElement && el.parentElement.closest('svg')) continue;
        if (!lgsLayout.shown(el)) continue;
        const r = el.getBoundingClientRect();
        if (r.width < 1 || r.height < 1) continue;
        const s = getComputedStyle(el);
        if (s.position === 'fixed') continue;
        if (el.scrollWidth > el.clientWidth + tolerance && s.overflowX !== 'visible' && el.tagName !== 'SELECT')
            found.push({el: lgsLayout.label(el), where: lgsLayout.where(el), why: 'scrolls or clips sideways',
                scrollWidth: el.scrollWidth, clientWidth: el.clientWidth});
        const parent = el.parentElement;
        if (!parent) continue;
        const p = parent.getBoundingClientRect();
        if (p.width < 1) continue;
        if (r.right > p.right + tolerance || r.left < p.left - tolerance)
            found.push({el: lgsLayout.label(el), where: lgsLayout.where(el), why: 'wider than its container',
                box: lgsLayout.round(r), container: lgsLayout.round(p)});
        if (found.length >= 25) break;
    }
    return found;
}"""
)

# Where each selector's first visible match sits relative to the visible part of the page around ``root``
# (the window cut by the notebook's scrolling area).
VIEWPORT_JS = (
    "([root, selectors]) => {"
    + _LAYOUT_LIB
    + """
    const view = lgsLayout.clipOf(root);
    return selectors.map(sel => {
        const el = [...root.querySelectorAll(sel)].find(e => lgsLayout.shown(e)
            && e.getBoundingClientRect().height > 0);
        if (!el) return {selector: sel, found: false};
        const r = el.getBoundingClientRect();
        const inside = r.top >= view.top - 1 && r.bottom <= view.bottom + 1 && r.left >= view.left - 1
            && r.right <= view.right + 1;
        return {selector: sel, found: true, inside, box: lgsLayout.round(r), viewport: lgsLayout.round(view)};
    });
}"""
)

# WCAG 2 contrast of each visible text piece under ``selectors`` against the background it is painted on
# (the colours of its ancestors composited from the page down; a transparent page counts as white).
CONTRAST_JS = (
    "([root, selectors]) => {"
    + _LAYOUT_LIB
    + """
    const rgba = c => { const m = c.match(/rgba?\\(([^)]+)\\)/); if (!m) return null;
        const v = m[1].split(/[ ,\\/]+/).filter(Boolean).map(Number);
        return [v[0], v[1], v[2], v.length > 3 ? v[3] : 1]; };
    const over = (top, under) => { const a = top[3];
        return [0, 1, 2].map(i => top[i] * a + under[i] * (1 - a)).concat([1]); };
    const background = el => { const chain = []; for (let e = el; e; e = e.parentElement) chain.push(e);
        let bg = [255, 255, 255, 1];
        for (const e of chain.reverse()) { const c = rgba(getComputedStyle(e).backgroundColor);
            if (c && c[3] > 0) bg = over(c, bg); }
        return bg; };
    const lum = c => { const [r, g, b] = c.slice(0, 3).map(v => { v /= 255;
        return v <= 0.04045 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4); });
        return 0.2126 * r + 0.7152 * g + 0.0722 * b; };
    const out = [];
    for (const sel of selectors) for (const host of root.querySelectorAll(sel)) {
        const seen = new Set();
        for (const p of lgsLayout.pieces(host)) {
            if (seen.has(p.id) || p.kind !== 'dom') continue;
            seen.add(p.id);
            const bg = background(p.el), fg = over(rgba(getComputedStyle(p.el).color), bg);
            const [hi, lo] = [lum(fg), lum(bg)].sort((x, y) => y - x);
            out.push({selector: sel, text: p.text, ratio: Math.round((hi + 0.05) / (lo + 0.05) * 100) / 100,
                color: fg.slice(0, 3).map(Math.round), background: bg.slice(0, 3).map(Math.round)});
        }
    }
    return out;
}"""
)


def overlapping_text(root, tolerance: float = 1.0) -> list:
    """Pairs of visible text pieces in ``root`` (a locator) that overlap by more than ``tolerance`` px both
    ways: DOM text (a Range's client rects per text node) and SVG ``text`` elements (bounding boxes). Pieces of
    one text node or one SVG ``text`` (and nested elements) are not compared with each other."""
    return root.page.evaluate(OVERLAPPING_TEXT_JS, [root.element_handle(), tolerance])


def small_text(root, minimum: float = 10.0) -> list:
    """Visible text in ``root`` rendered below ``minimum`` px: computed font size for DOM text; for SVG text the
    font size times the scale of the SVG's screen transform (``getScreenCTM``), i.e. the glyph size on screen."""
    return root.page.evaluate(SMALL_TEXT_JS, [root.element_handle(), minimum])


def clipped(root, tolerance: float = 1.0) -> list:
    """Elements in ``root`` (and ``root`` itself) that scroll or clip sideways, or stick out of their parent."""
    return root.page.evaluate(CLIPPED_JS, [root.element_handle(), tolerance])


def in_view(root, selectors) -> list:
    """For each selector, where its first visible match in ``root`` is against the visible page area."""
    return root.page.evaluate(VIEWPORT_JS, [root.element_handle(), list(selectors)])


def contrast(root, selectors) -> list:
    """WCAG contrast ratio of every visible DOM text piece under ``selectors`` in ``root``."""
    return root.page.evaluate(CONTRAST_JS, [root.element_handle(), list(selectors)])


def scroll_to_top(locator) -> None:
    """Scroll the page (Lab's notebook area) so that the element's top is at the top of the visible area."""
    locator.evaluate("el => el.scrollIntoView({block: 'start', inline: 'nearest'})")
    locator.page.wait_for_timeout(200)  # Lab's windowed notebook attaches the cells now in view


def set_theme(page, name: str) -> None:
    """Switch Lab's theme (``'JupyterLab Light'``, ``'JupyterLab Dark'``) and wait until the page uses it."""
    page.evaluate("t => window.jupyterapp.commands.execute('apputils:change-theme', {theme: t})", name)
    page.wait_for_function(
        "t => document.body.dataset.jpThemeName === t && document.body.dataset.jpThemeLight !== undefined",
        arg=name,
        timeout=30_000,
    )
    page.wait_for_timeout(300)  # the theme's stylesheet applies


def side_panel(page, open_: bool) -> None:
    """Open Lab's file browser in the left area, or collapse the left area."""
    if open_:
        page.evaluate("() => window.jupyterapp.shell.activateById('filebrowser')")
    else:
        page.evaluate("() => window.jupyterapp.shell.collapseLeft()")
    page.wait_for_function(
        """o => { const a = document.querySelector('#jp-left-stack');
            const shut = !a || a.offsetWidth === 0 || a.classList.contains('lm-mod-hidden');
            return o ? !!a && a.offsetWidth > 50 : shut; }""",
        arg=open_,
        timeout=10_000,
    )
    page.wait_for_timeout(300)  # the notebook area lays out again


def section_headers(root) -> list:
    """The headers of the on-demand sections (Accordion items) in ``root``, as locators."""
    headers = root.locator(f".lgs-more {COLLAPSE_HEADER}")
    return [headers.nth(i) for i in range(headers.count())]


def run_live_notebook(page, server: LabServer, *, opener=None) -> dict:
    """Copy the live notebook into the server's folder, open it (``opener``: :func:`open_notebook` for Lab,
    :func:`open_in_notebook` for Notebook 7), run every cell with the kernel ``python3`` and wait until each
    live panel is visible. Returns the source path, the notebook, its panel cells and the first panel."""
    import shutil

    import nbformat

    opener = opener or open_notebook
    source, cells = live_notebook()
    shutil.copy(source, server.work / source.name)
    nb = nbformat.read(source, as_version=4)
    opener(page, server, source.name, len(nb.cells))
    wait_kernel_idle(page)
    assert kernel_name(page) == "python3"
    run_all(page)
    panels = [cell_at(page, i).locator(".lgs-panel") for i in cells]
    for p in panels:
        p.first.wait_for(state="visible", timeout=KERNEL_TIMEOUT)
    return {"source": source, "nb": nb, "cells": cells, "cell": cell_at(page, cells[0]), "panel": panels[0].first}


def shot_whole(locator, name: str) -> Path:
    """Screenshot of the whole element even when it is taller than the window: the window is made tall enough
    for a moment (its width, hence the layout, stays), then restored."""
    page = locator.page
    size = page.viewport_size
    height = locator.evaluate("el => Math.ceil(el.getBoundingClientRect().height)")
    try:
        page.set_viewport_size({"width": size["width"], "height": min(max(size["height"], height + 400), 12_000)})
        page.wait_for_timeout(300)
        locator.scroll_into_view_if_needed()
        return shot(locator, name)
    finally:
        page.set_viewport_size(size)
        page.wait_for_timeout(200)
