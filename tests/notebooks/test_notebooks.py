"""Every example notebook runs headless, shows the panel, and its saved output still reads when shared.

Execution is nbclient's (what ``jupyter nbconvert --execute`` does); the export is ``jupyter nbconvert --to html``
as a user runs it. The notebooks are executed once per session (see ``nbtools.executed_notebook``); the browser
tests reuse them.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import nbformat
import pytest
from bs4 import BeautifulSoup

sys.path.insert(0, str(Path(__file__).resolve().parent))
import nbtools  # noqa: E402

NOTEBOOKS = nbtools.notebooks_under_test()
IDS = [nbtools.notebook_id(p) for p in NOTEBOOKS]
PANEL_OUTPUT_BUDGET = 300_000  # bytes of saved notebook output for one panel (issue 4, "Speed and size")


@pytest.fixture(scope="module", params=NOTEBOOKS, ids=IDS)
def executed(request, tmp_path_factory):
    source = request.param
    path = nbtools.executed_notebook(source, tmp_path_factory.getbasetemp())
    return source, path, nbformat.read(path, as_version=4)


@pytest.fixture
def ran(executed):
    """The executed notebook, for checks that only make sense when every cell ran."""
    if nbtools.cell_errors(executed[2]):
        pytest.skip("the notebook raised an error (test_notebook_runs_without_error reports it)")
    return executed


def _shown_panels(nb):
    cells = nbtools.shown_panels(nb)
    if not cells:
        pytest.skip("this notebook displays no %lagsight diagnosis")
    return cells


def _html(out) -> str:
    value = out.get("data", {}).get("text/html", "")
    return "".join(value) if isinstance(value, list) else value


def test_an_example_notebook_shows_the_live_panel():
    # issue 4: the example notebooks show the panel, so the checks below exercise it
    live = []
    for path in sorted(nbtools.EXAMPLES.glob("*.ipynb")):
        nb = nbformat.read(path, as_version=4)
        live += [path.name for i in nbtools.shown_panels(nb) if not nbtools.static_only(nb.cells[i])]
    assert live, f"no notebook in {nbtools.EXAMPLES} displays a live %lagsight panel"


def test_notebook_runs_without_error(executed):
    source, _, nb = executed
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert code, f"{source.name} has no code cell"
    errors = nbtools.cell_errors(nb)
    assert not errors, f"{source.name} raised: " + "; ".join(errors)
    for i, cell in enumerate(code):
        assert cell.execution_count is not None, f"code cell {i} of {source.name} did not run"
        stderr = "".join(o.text for o in cell.outputs if o.output_type == "stream" and o.name == "stderr")
        assert "Traceback" not in stderr, f"cell {i} of {source.name} printed a traceback:\n{stderr[-1500:]}"


def test_panel_outputs_carry_html_and_widget(ran):
    source, _, nb = ran
    state = nb.metadata.get("widgets", {}).get(nbtools.WIDGET_STATE, {}).get("state", {})
    for i in _shown_panels(nb):
        cell = nb.cells[i]
        outs = cell.outputs
        snapshots = [o for o in outs if "lgs-root" in _html(o)]
        assert snapshots, f"%lagsight in cell {i} of {source.name} left no text/html diagnosis"
        for o in snapshots:
            assert o.data.get("text/plain"), f"the diagnosis in cell {i} has no text/plain"
            # the snapshot is an output of its own: nbconvert drops every other mimetype of a widget output
            assert nbtools.WIDGET_VIEW not in o.data, f"cell {i}: the static HTML shares an output with the widget"
        views = [o for o in outs if nbtools.WIDGET_VIEW in o.get("data", {})]
        if nbtools.static_only(cell):
            assert not views, f"cell {i} asked for static output but shows a widget"
            continue
        assert len(views) == 1, f"cell {i} of {source.name} shows {len(views)} widget views (expected 1)"
        model_id = views[0].data[nbtools.WIDGET_VIEW]["model_id"]
        # nbclient stores the widget state, so the widget can be rebuilt from the saved notebook
        assert model_id in state, f"cell {i}: widget {model_id} is missing from the stored widget state"


def test_panel_output_size(ran):
    source, _, nb = ran
    cells = nbtools.panel_cells(nb)
    if not cells:
        pytest.skip("this notebook runs no %lagsight")
    for i in cells:
        size = len(json.dumps(nb.cells[i].outputs))
        assert size <= PANEL_OUTPUT_BUDGET, f"cell {i} of {source.name}: {size:,} bytes of output"
    # with the stored widget state (what nbclient / nbconvert --execute save) on top
    live = [i for i in nbtools.shown_panels(nb) if not nbtools.static_only(nb.cells[i])]
    if live:
        total = sum(len(json.dumps(nb.cells[i].outputs)) for i in cells)
        total += len(json.dumps(nb.metadata.get("widgets", {})))
        assert total <= PANEL_OUTPUT_BUDGET * len(live), (
            f"{source.name}: {total:,} bytes of output and widget state for {len(live)} panel(s)"
        )


def test_nbconvert_html_shows_the_diagnosis(ran, tmp_path):
    source, path, nb = ran
    shown = _shown_panels(nb)
    env = nbtools.jupyter_env(tmp_path / "jupyter")
    html_path = nbtools.nbconvert_html(path, tmp_path / "html", env)
    soup = BeautifulSoup(html_path.read_text(encoding="utf-8"), "html.parser")
    for name, selector in nbtools.MARKERS.items():
        found = soup.select(selector)
        # one per shown diagnosis at least (a panel cell may show more than one view)
        assert len(found) >= len(shown), (
            f"{source.name}: {name} ({selector}) appears {len(found)} times "
            f"in nbconvert's HTML for {len(shown)} diagnoses"
        )
    for fig in soup.select(nbtools.MARKERS["scale figure"]):
        missing = nbtools.scale_figure_missing(fig)
        assert not missing, f"{source.name}: the scale figure in nbconvert's HTML lacks {missing}"
    roots = [r for r in soup.select(".lgs-root") if r.find_parent(class_="lgs-snapshot") is not None]
    live = [i for i in shown if not nbtools.static_only(nb.cells[i])]
    assert len(roots) >= len(live), "a panel's static snapshot is missing from nbconvert's HTML"
    if live:
        # nbconvert renders the stored widgets with scripts from the internet: the reason for the snapshot
        assert soup.find("script", attrs={"type": nbtools.WIDGET_VIEW}) is not None


def test_html_only_viewer_shows_the_diagnosis(ran):
    source, _, nb = ran
    cells = _shown_panels(nb)
    soup = BeautifulSoup(nbtools.html_only_page(nb, source.stem), "html.parser")
    for name, selector in nbtools.MARKERS.items():
        assert len(soup.select(selector)) >= len(cells), f"{source.name}: no {name} for a text/html-only viewer"
    for fig in soup.select(nbtools.MARKERS["scale figure"]):
        assert not nbtools.scale_figure_missing(fig)
