"""The panel's deferred work runs on a real kernel's event loop (ipykernel under nbclient).

The snapshot refresh and the idle-time drawing ahead are scheduled with ``loop.call_later`` only when an
asyncio loop is running; headless unit tests cover the logic, this checks that ipykernel does run that loop
between cells, so a panel shown in a notebook really draws the alpha/alternative views ahead.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import nbformat

sys.path.insert(0, str(Path(__file__).resolve().parent))
import nbtools  # noqa: E402

CELLS = [
    # an invented hourly series with AR(1) errors (demo data)
    """import asyncio, json
import numpy as np, pandas as pd, statsmodels.api as sm
import lagsight
from lagsight.panel import DiagnosisPanel
rng = np.random.default_rng(3)
n = 600
x = rng.normal(size=(n, 2))
u = np.zeros(n)
for t in range(1, n):
    u[t] = 0.5 * u[t - 1] + rng.normal()
fit = sm.OLS(x @ [1.0, -2.0] + u, sm.add_constant(x)).fit()""",
    "panel = DiagnosisPanel(lagsight.diagnose(fit), prefetch_delay=0.2)\npanel.show()",
    "print(json.dumps({'scheduled': panel._prefetch_handle is not None, 'renders': panel.renders}))",
    """for _ in range(600):  # the kernel is idle between these awaits: the drawing ahead runs
    await asyncio.sleep(0.05)
    if panel._prefetch_handle is None:
        break
drawn, left = panel.renders, panel.prefetch_step()
for alpha, alternative in panel._level_choices():
    panel.alpha_picker.value, panel.alternative_picker.value = alpha, alternative
print(json.dumps({'left': left, 'renders': drawn, 'drawn_on_pick': panel.renders - drawn,
                  'errors': panel.errors}))""",
]


def _printed(cell) -> dict:
    text = "".join(o.get("text", "") for o in cell.outputs if o.get("output_type") == "stream")
    return json.loads(text.strip().splitlines()[-1])


def test_a_shown_panel_draws_ahead_between_cells_in_a_real_kernel(tmp_path):
    path = tmp_path / "loop.ipynb"
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(src) for src in CELLS]
    nbformat.write(nb, path)
    ran = nbtools.execute(path, tmp_path, nbtools.jupyter_env(tmp_path / "jupyter"))
    errors = nbtools.cell_errors(ran)
    assert not errors, errors
    first, last = _printed(ran.cells[2]), _printed(ran.cells[3])
    assert first["scheduled"], "show() in a kernel cell scheduled nothing: no running event loop was seen"
    assert last["renders"] > first["renders"], "nothing was drawn ahead while the kernel was idle"
    assert last["left"] is False, "the drawing ahead did not finish"
    # every alpha/alternative choice was drawn ahead, so picking each one drew nothing new
    assert last["drawn_on_pick"] == 0 and not last["errors"], last
