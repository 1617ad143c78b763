"""Write the example notebooks in example_notebooks/ (unexecuted) from the cell lists below.

Every scenario is invented and generated in code (lagsight.scenarios) with a fixed seed.
Run: python scripts/make_notebooks.py
"""

from __future__ import annotations

from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

OUT = Path(__file__).resolve().parent.parent / "example_notebooks"

NOTEBOOKS = {
    "quickstart": [
        (
            "md",
            "# Quickstart: daily water demand\n\n"
            "An invented municipal water utility models daily treated-water demand on temperature, rainfall "
            "and a weekend flag. This is the existing modelling notebook; lagsight is **one added line**.",
        ),
        (
            "code",
            "import statsmodels.formula.api as smf\n"
            "from lagsight.scenarios import water_demand\n\n"
            "demand = water_demand()          # 730 invented days, generated with a fixed seed\n"
            "fit = smf.ols('demand_ml ~ temp_c + rain_mm + weekend', data=demand).fit()\n"
            "fit.params.round(3)",
        ),
        (
            "md",
            "## The added line\n\nLoad the extension once, then hand the fitted model to `%lagsight` (a bare "
            "`%lagsight` takes the model the previous cell fitted and says so). The panel leads with the verdict, "
            "the 0\u20134 scale and the correlogram on one screen; the sections below it open on demand, and "
            "*Download the report* gives a standalone HTML file in the browser.",
        ),
        ("code", "%load_ext lagsight\n%lagsight fit"),
        ("md", "The magic returns the diagnosis, so it can be kept and used from Python:"),
        ("code", "d = %lagsight fit --quiet\nprint(d.verdict.headline)\nd.remedies.table.round(4)"),
        ("md", "A sentence to paste into a report:"),
        ("code", "from lagsight.render.text import report_sentence\nprint(report_sentence(d, fmt='text'))"),
    ],
    "shuffled_split": [
        (
            "md",
            "# The shuffled-split trap\n\n"
            "The same water-demand model, fitted on a *random* 70% training split. A random split keeps the "
            "dates but not their order, so serial-correlation tests on the row order measure nothing.",
        ),
        (
            "code",
            "import statsmodels.formula.api as smf\n"
            "from lagsight.scenarios import water_demand\n\n"
            "demand = water_demand()\n"
            "train = demand.sample(frac=0.7, random_state=42)   # a random train split\n"
            "fit = smf.ols('demand_ml ~ temp_c + rain_mm + weekend', data=train).fit()",
        ),
        ("code", "%load_ext lagsight\nshuffled = %lagsight fit --quiet\nprint(shuffled.verdict.headline)"),
        (
            "md",
            "The order guard notices that the index goes backwards. Sorting by the date index shows what the "
            "shuffle hid:",
        ),
        ("code", "%lagsight fit --order index"),
    ],
    "lagged_response": [
        (
            "md",
            "# A lagged response among the regressors\n\n"
            "Invented daily peak load of a regional grid, modelled on cooling and heating degrees and "
            "*yesterday's load*. With a lagged response as a regressor the Durbin-Watson statistic is biased "
            "towards 2, so Durbin's alternative test leads the verdict (Durbin's h is shown beside it).",
        ),
        (
            "code",
            "import statsmodels.formula.api as smf\n"
            "from lagsight.scenarios import grid_peak_load\n\n"
            "load = grid_peak_load()\n"
            "fit = smf.ols('load_mw ~ load_lag + cdd + hdd', data=load).fit()",
        ),
        ("code", "%load_ext lagsight\n%lagsight fit"),
        ("md", "The test table, kept as an object:"),
        ("code", "d = %lagsight fit --quiet\nd.to_frame()[['test', 'statistic', 'pvalue', 'reading']]"),
    ],
    "seasonal": [
        (
            "md",
            "# Seasonal correlation that lag 1 misses\n\n"
            "Invented monthly outpatient visits of a clinic network. What the model leaves out repeats from "
            "one year to the next: the lag-1 statistic sees nothing, the order-12 statistic does.",
        ),
        (
            "code",
            "import statsmodels.formula.api as smf\n"
            "from lagsight.scenarios import clinic_visits\n\n"
            "visits = clinic_visits()\n"
            "fit = smf.ols('visits ~ population_k + flu_season', data=visits).fit()",
        ),
        ("code", "%load_ext lagsight\n%lagsight fit --period 12"),
        ("md", "Lag 1 against lag 12, side by side:"),
        ("code", "d = %lagsight fit --period 12 --quiet\nd.to_frame()[['test', 'statistic', 'pvalue', 'reading']]"),
    ],
    "screening": [
        (
            "md",
            "# Screening a few hundred store regressions\n\n"
            "An invented retail chain fits one weekly sales model per store. `lagsight.screen` tests them "
            "all, with exact p-values and Benjamini-Hochberg adjustment across stores.",
        ),
        (
            "code",
            "import lagsight\nfrom lagsight.scenarios import store_sales\n\n"
            "sales = store_sales(n_stores=300)\nsales.head()",
        ),
        (
            "code",
            "result = lagsight.screen(sales, groups='store', response='units', predictors=['price', 'promo'],\n"
            "                         progress=False)\nresult.table.head(10)",
        ),
        ("code", "(result.table['dw_p_adjusted'] < 0.05).mean()"),
    ],
}


def build(cells) -> nbformat.NotebookNode:
    nb = new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    for kind, text in cells:
        nb.cells.append(new_markdown_cell(text) if kind == "md" else new_code_cell(text))
    return nb


def main():
    OUT.mkdir(exist_ok=True)
    for name, cells in NOTEBOOKS.items():
        nbformat.write(build(cells), OUT / f"{name}.ipynb")
        print(OUT / f"{name}.ipynb")


if __name__ == "__main__":
    main()
