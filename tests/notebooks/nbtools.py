"""Shared helpers for the notebook and browser tests: isolated Jupyter folders, execution, export.

Every Jupyter folder (config, data, runtime, paths, Lab settings and workspaces, IPython profile) lives in a
temporary directory, and the only kernel spec is ``python3`` pointing at the interpreter running the tests, so
nothing depends on (or writes to) the user's own Jupyter set-up.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import nbformat

REPO = Path(__file__).resolve().parents[2]
EXAMPLES = REPO / "example_notebooks"
FIXTURES = Path(__file__).resolve().parent / "fixtures"
SCREENSHOTS = REPO / "benchmarks" / "out" / "screenshots"

WIDGET_VIEW = "application/vnd.jupyter.widget-view+json"
WIDGET_STATE = "application/vnd.jupyter.widget-state+json"
CELL_TIMEOUT = 600  # seconds per cell; the first import of the stack dominates

# What a reader must see, as CSS selectors into the HTML written by lagsight.render.html.
# (kept here once so the static checks and the browser checks look for the same things)
MARKERS = {
    "verdict": ".lgs-root .lgs-headline",
    "scale figure": ".lgs-root figure.lgs-figure-scale",
    "test table": ".lgs-root table.lgs-tests",
}

# What the 0-4 scale figure draws, as the classes lagsight.render gives its SVG parts (issue 4: five shaded
# regions, the exact null density, the observed d)
SCALE_PARTS = (
    "lgs-region-positive",
    "lgs-region-inconclusive-low",
    "lgs-region-none",
    "lgs-region-inconclusive-high",
    "lgs-region-negative",
    "lgs-density",
    "lgs-observed",
)


def scale_figure_missing(figure) -> list[str]:
    """What a scale figure (a BeautifulSoup element) lacks: SVG parts, or a PNG data URI when it is an image."""
    if figure.find("svg") is not None:
        return [c for c in SCALE_PARTS if figure.select_one(f"svg .{c}") is None]
    img = figure.find("img")
    if img is not None and str(img.get("src", "")).startswith("data:image/png;base64,"):
        return []
    return ["an inline SVG or PNG drawing"]


_MAGIC_LINE = re.compile(r"^\s*(?:[A-Za-z_][A-Za-z0-9_]*\s*=\s*)?%lagsight(?:\s|$)", re.M)


def notebooks_under_test() -> list[Path]:
    """The example notebooks, plus the small fixture notebooks of this folder."""
    return sorted(EXAMPLES.glob("*.ipynb")) + sorted(FIXTURES.glob("*.ipynb"))


def notebook_id(path: Path) -> str:
    return f"{path.parent.name}/{path.stem}"


def panel_cells(nb) -> list[int]:
    """Indices of the code cells that show a diagnosis with ``%lagsight``."""
    return [i for i, c in enumerate(nb.cells) if c.cell_type == "code" and _MAGIC_LINE.search(c.source)]


def _magic_line(cell) -> str:
    return [ln for ln in cell.source.splitlines() if _MAGIC_LINE.search(ln)][-1].strip()


def shown_panels(nb) -> list[int]:
    """The ``%lagsight`` cells that display a full diagnosis (not silenced by ';', an assignment or --quiet)."""
    shown = []
    for i in panel_cells(nb):
        line = _magic_line(nb.cells[i])
        assigned = "=" in line.split("%lagsight")[0]
        if not (line.endswith(";") or assigned or "--quiet" in line):
            shown.append(i)
    return shown


def static_only(cell) -> bool:
    """True when the cell asks for static output (no widget)."""
    return "--static" in _magic_line(cell)


def jupyter_env(root: Path, *, kernels: bool = True) -> dict:
    """Environment whose Jupyter folders all sit under ``root``.

    With ``kernels`` the one kernel spec is ``python3`` = this interpreter; without, no kernel spec at all
    (the Lab then has nothing to start).
    """
    root = Path(root)
    dirs = {
        "JUPYTER_CONFIG_DIR": root / "config",
        "JUPYTER_DATA_DIR": root / "data",
        "JUPYTER_RUNTIME_DIR": root / "runtime",
        "JUPYTER_PATH": root / "path",
        "JUPYTERLAB_SETTINGS_DIR": root / "settings",
        "JUPYTERLAB_WORKSPACES_DIR": root / "workspaces",
        "IPYTHONDIR": root / "ipython",
    }
    for d in dirs.values():
        d.mkdir(parents=True, exist_ok=True)
    if kernels:
        spec = dirs["JUPYTER_PATH"] / "kernels" / "python3"
        spec.mkdir(parents=True, exist_ok=True)
        (spec / "kernel.json").write_text(
            json.dumps(
                {
                    "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
                    "display_name": "Python 3 (ipykernel)",
                    "language": "python",
                    "metadata": {"debugger": False},
                }
            )
        )
    env = {k: v for k, v in os.environ.items() if not k.startswith(("JUPYTER", "IPYTHON"))}
    env.pop("MPLBACKEND", None)  # CI sets Agg for the test process; a user's kernel has the inline backend
    env.update({k: str(v) for k, v in dirs.items()})
    env["PYDEVD_DISABLE_FILE_VALIDATION"] = "1"
    return env


def execute(path: Path, workdir: Path, env: dict):
    """Run every cell of the notebook at ``path`` with nbclient (kernel ``python3`` from ``env``)."""
    from jupyter_client.kernelspec import KernelSpecManager
    from jupyter_client.manager import AsyncKernelManager
    from nbclient import NotebookClient

    nb = nbformat.read(path, as_version=4)
    ksm = KernelSpecManager(kernel_dirs=[str(Path(env["JUPYTER_PATH"]) / "kernels")])
    km = AsyncKernelManager(kernel_name="python3", kernel_spec_manager=ksm)
    # errors stay in the outputs (and fail test_notebook_runs_without_error), so each is reported once
    client = NotebookClient(
        nb,
        km=km,
        timeout=CELL_TIMEOUT,
        kernel_name="python3",
        allow_errors=True,
        resources={"metadata": {"path": str(workdir)}},
    )
    client.execute(env=env)
    return nb


def nbconvert_html(ipynb: Path, out_dir: Path, env: dict) -> Path:
    """``jupyter nbconvert --to html`` of a saved notebook (default template), as a user would run it."""
    out_dir.mkdir(parents=True, exist_ok=True)
    cmd = [sys.executable, "-m", "nbconvert", "--to", "html", "--output-dir", str(out_dir), str(ipynb)]
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, f"nbconvert failed: {proc.stderr[-2000:]}"
    return out_dir / (ipynb.stem + ".html")


def cell_errors(nb) -> list[str]:
    """'cell i: Name: message' for every error output of the notebook."""
    return [
        f"cell {i}: {o.ename}: {o.evalue}"
        for i, c in enumerate(nb.cells)
        if c.cell_type == "code"
        for o in c.get("outputs", [])
        if o.output_type == "error"
    ]


_IMAGE_TYPES = ("image/png", "image/jpeg", "image/gif")


def html_only_page(nb, title: str) -> str:
    """The notebook as a viewer that renders only text/html and images would show it.

    Per output: its ``text/html`` when present, else its first image, else nothing (no text/plain, no widget,
    no JavaScript). Markdown cells and inputs are left out: only what the outputs carry is judged.
    """
    parts = []
    for i, cell in enumerate(nb.cells):
        if cell.cell_type != "code":
            continue
        for j, out in enumerate(cell.get("outputs", [])):
            data = out.get("data", {})
            body = None
            if "text/html" in data:
                body = _joined(data["text/html"])
            elif "image/svg+xml" in data:
                body = _joined(data["image/svg+xml"])
            else:
                for mime in _IMAGE_TYPES:
                    if mime in data:
                        body = f'<img alt="" src="data:{mime};base64,{_joined(data[mime]).strip()}">'
                        break
            if body is not None:
                parts.append(f'<div class="viewer-output" data-cell="{i}" data-output="{j}">{body}</div>')
    return (
        "<!DOCTYPE html><html><head><meta charset='utf-8'><title>"
        + title
        + "</title></head><body>"
        + "\n".join(parts)
        + "</body></html>"
    )


def _joined(value) -> str:
    return "".join(value) if isinstance(value, list) else str(value)


def strip_scripts(html: str) -> str:
    """Remove <script> elements (what a viewer rendering only HTML and images does at least)."""
    return re.sub(r"<script\b.*?</script\s*>", "", html, flags=re.S | re.I)


_EXECUTED: dict = {}


def executed_notebook(path: Path, base: Path) -> Path:
    """Execute ``path`` once per test session (cached) and return the saved ``.ipynb``.

    The notebook runs in a copy of its folder under ``base`` (so it may read its neighbours and write files
    without touching the repository); the result is saved as nbclient leaves it, widget state included, which
    is what ``jupyter nbconvert --execute`` writes.
    """
    key = Path(path).resolve()
    if key not in _EXECUTED:
        work = Path(base) / "executed" / f"{key.parent.name}-{key.stem}"
        shutil.copytree(
            key.parent, work, ignore=shutil.ignore_patterns("*.ipynb", ".ipynb_checkpoints"), dirs_exist_ok=True
        )
        nb = execute(key, work, jupyter_env(Path(base) / "jupyter-nbclient"))
        out = work / key.name
        nbformat.write(nb, out)
        _EXECUTED[key] = out
    return _EXECUTED[key]
