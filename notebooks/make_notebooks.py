"""Write the walkthrough notebooks of this folder (and the app notebook) from the text below.

    python notebooks/make_notebooks.py

Each notebook is built with nbformat, run once with nbclient so that the
cells marked ``# NBVAL_CHECK_OUTPUT`` keep the text they print (nbval
compares against it: ``pytest --nbval-lax notebooks/``), and written with
every other output removed: an executed widget carries megabytes of
plotly.js that do not belong in the repository. Everything the notebooks
use is the invented demo data in ``demo_data/``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import nbformat
from nbclient import NotebookClient

HERE = Path(__file__).resolve().parent
APP_NOTEBOOK = HERE.parent / "auditmean" / "widgets" / "app.ipynb"
CHECK = "# NBVAL_CHECK_OUTPUT"

SETUP = '''import os

os.environ["PLOTLY_RENDERER"] = "plotly_mimetype"  # the same stored outputs everywhere

import tempfile
from pathlib import Path

from auditmean.cli.demo import find_demo_data

data = find_demo_data()  # the invented demo files (demo_data/ of the project)
work = Path(tempfile.mkdtemp(prefix="auditmean-walkthrough-"))  # a fresh folder for this run'''


def md(text: str) -> nbformat.NotebookNode:
    return nbformat.v4.new_markdown_cell(text.strip())


def code(text: str) -> nbformat.NotebookNode:
    return nbformat.v4.new_code_cell(text.strip())


AUDITOR = [
    md("""
# Receivables at the year end: the auditor's walkthrough

**Everything in this notebook is invented demo data**: the open invoices of Quillonby Fixings Ltd,
a fictional distributor (see `demo_data/README.md`). No real company or person is behind them.

The job, one panel per step, all on one shared state: read the ledger, stratify it, plan the sample
size, check the design by simulation, draw and record the selection, enter what was found, and
conclude. Every panel calls auditmean's engine and shows what it returns; every step is saved in
the engagement folder, so you can stop at any point and resume later.

In Jupyter you would click the buttons; here each click is written as `button.click()`, which is
exactly what the button does.
"""),
    code(SETUP),
    code('''from auditmean.plan import MisstatementPattern
from auditmean.widgets import (
    CoveragePanel,
    EngagementState,
    EvaluationPanel,
    PlanPanel,
    PopulationPanel,
    ResultsPanel,
    SelectionPanel,
    StrataPanel,
)

state = EngagementState(demo_data=data)  # demo_data: offer the demo's conveniences'''),
    md("""
## 1. The population

Name the file and the columns holding the item id and the book value, then read it. auditmean checks
every row and says where one cannot be read; the profile shows how skewed the book values are and
what to do with credits and zero balances.
"""),
    code('''population = PopulationPanel(state, source=data / "invoices.csv", id_column="invoice_no", value_column="book_value")
population.read_button.click()
population'''),
    code(f'''{CHECK}
p = state.profile
print(f"{{state.population.count:,}} items, book value {{state.population.total:,.2f}}")
print(f"{{p.credit_count:,}} credits, {{p.zero_count:,}} zero balances; skewness of the book values {{p.skewness:.2f}}")'''),
    md("""
## 2. The strata

Four strata by the cumulative square-root rule; every invoice of 250,000 or more is examined in full.
Move the slider or change the top stratum in the panel and the strata and pictures follow.
"""),
    code('''strata = StrataPanel(state, method="cumulative_sqrt", n_strata=4, top_cutoff=250_000)
strata'''),
    code(f'''{CHECK}
print(state.strata.table[["stratum", "count", "book_total"]].to_string(index=False))'''),
    md("""
## 3. The sample size

Tolerable misstatement 760,000 (2 % of the book value), expected 150,000, a 5 % risk of incorrect
acceptance and a 20 % risk of incorrect rejection, for ratio estimation, with the spread taken from an
assumed pattern: 4 % of the invoices wrong by a fifth of their value. Change any input in the panel and
the plan and its picture follow at once.
"""),
    code('''plan = PlanPanel(
    state,
    tolerable=760_000,
    expected=150_000,
    risk_incorrect_acceptance=0.05,
    risk_incorrect_rejection=0.20,
    method="ratio",
    std_dev_source=MisstatementPattern(0.04, 0.20),
    folder=work / "receivables-2024",
)
plan'''),
    code(f'''{CHECK}
print(f"sample size {{state.plan.total_size}}")
plan.tolerable.value = 400_000  # as if typed in the panel
print(f"with tolerable misstatement 400,000: {{state.plan.total_size}}")
plan.tolerable.value = 760_000
print(f"back at 760,000: {{state.plan.total_size}}")'''),
    md("""
## 4. The coverage check

Before any invoice is examined: how often would the limits of this design contain the true audited
total if 4 % of the invoices were overstated by a fifth? (500 simulated samples, fixed seed, so the
numbers below repeat.) The Stop button ends a long run early and keeps what was done.
"""),
    code('''coverage = CoveragePanel(state, replications=500, seed=2024)
coverage.run_button.click()
coverage.wait()
coverage'''),
    code(f'''{CHECK}
row = state.coverage.by_estimator.set_index("estimator").loc["ratio"]
print(f"ratio estimation: two-sided limits held in {{row['coverage']:.1%}} of the simulated samples")'''),
    md("""
## 5. The selection

Save the plan (this starts the engagement folder), then draw the selection with a seed. The seed and
the selection are recorded; anyone with the seed and the ledger can re-perform it.
"""),
    code('''plan.save_button.click()
plan.wait_check()  # the plan's own coverage check, saved with the plan
selection = SelectionPanel(state, seed="quillonby-2024-demo")
selection.draw_button.click()
selection.wait()
selection'''),
    code(f'''{CHECK}
print(f"{{len(state.selection)}} invoices selected with seed {{state.engagement.seed()!r}}")
print("first in the selection:", ", ".join(state.selection["item_id"].head(3)))'''),
    md("""
## 6. The audited values

Type what you found for each invoice; each value is saved in the engagement folder the moment it is
entered, and a corrected value is added as a new entry, the earlier one kept. Here the first value is
typed into the grid; then the demo-only button looks up the invented answers for the rest (a real
engagement has no such file: the values come from examining each invoice).
"""),
    code('''import pandas as pd

results = ResultsPanel(state, entered_by="walkthrough")
truth = pd.read_csv(data / "invoices_audited.csv", dtype=str).set_index("invoice_no")["audited_value"]
first = results._page_items[0]
results.rows[0].value.value = truth[first]  # as if typed into the first row
results.fill_from_demo()
results'''),
    code(f'''{CHECK}
print(f"{{len(state.results.current)}} of {{len(state.selection)}} selected invoices have an audited value")
print(f"{{len(state.results.log)}} entries in the history")'''),
    md("""
## 7. The conclusion

Every applicable method, its limits at the planned risk, the warnings (each with its rule, its source
and what would help) and, where the normal approximation is in doubt, a second opinion by bootstrap.
"""),
    code('''evaluation = EvaluationPanel(state)
evaluation.evaluate_button.click()
evaluation.wait()
evaluation'''),
    code(f'''{CHECK}
c = state.evaluation.conclusion
print(f"relied on: {{state.evaluation.primary}}; the sample {{c.verdict}} the conclusion")
print(f"projected misstatement {{c.projected_misstatement:,.2f}}, limits {{c.lower_limit:,.2f}} to {{c.upper_limit:,.2f}}")
print(f"warnings: {{len(state.evaluation.flags)}}")'''),
    md("""
## Nothing is lost

Open the engagement folder again in a new state, as after a closed tab or a restarted kernel: every
step and every entry is there.
"""),
    code(f'''{CHECK}
again = EngagementState.from_folder(state.engagement.folder)
print(f"{{len(again.results.current)}} audited values, plan of {{again.plan.total_size}} items, seed {{again.engagement.seed()!r}}")'''),
    md("""
## The whole job in one window

`App` puts every panel in one tab each; `auditmean app` serves it in the browser.
"""),
    code('''from auditmean.widgets import App

App(again)'''),
]

STOCK = [
    md("""
# A stock count valued by mean-per-unit: the stock counter's walkthrough

**Everything in this notebook is invented demo data**: the stock lines of Marrowdene Catering
Supplies Ltd, a fictional wholesaler with five locations (see `demo_data/README.md`).

There is no book value per line here: the population is the list of lines to count. The counter
counts a sample of lines in each location and projects the value of the whole stock by mean-per-unit
estimation, with the locations as strata.
"""),
    code(SETUP),
    code('''import pandas as pd

lines = pd.read_csv(data / "stock_lines.csv", dtype={"line_id": str})
locations = pd.read_csv(data / "stock_locations.csv").rename(columns={"location": "stratum", "lines": "count"})
locations'''),
    md("""
## The sample size

Mean-per-unit needs a guess of how much the value of a line varies in each location. Here the
counter assumes a standard deviation of 1,500 per line everywhere (an invented figure, as from last
year's count), and wants the total within 800,000 (about a tenth of the value) at a 5 % risk. The panel plans on that table
directly; change an input and the sizes follow.
"""),
    code('''from auditmean.widgets import EngagementState, PlanPanel

table = locations.assign(std_dev=1_500.0)
state = EngagementState(strata=table)
plan = PlanPanel(state, tolerable=800_000, risk_incorrect_acceptance=0.05, method="mpu", minimum=30)
plan'''),
    code(f'''{CHECK}
print(state.plan.table[["stratum", "count", "size"]].to_string(index=False))
print(f"lines to count: {{state.plan.total_size}} of {{state.plan.population_count:,}}")'''),
    md("""
## The selection and the count

The lines of each location are drawn with a recorded seed (every line's key depends on the seed and
its id alone, so the draw can be re-performed). The demo then "counts" them by looking up the invented
true count; a real counter goes and counts.
"""),
    code('''from auditmean.selection import select

frame = lines.rename(columns={"line_id": "item_id", "location": "stratum"})[["item_id", "stratum"]]
drawn = select(frame, state.plan.sizes, seed="marrowdene-count-2024")
counted = pd.read_csv(data / "stock_counted.csv", dtype={"line_id": str}).set_index("line_id")
sample = drawn[["stratum", "item_id"]].assign(audited_value=counted.loc[drawn["item_id"], "counted_value"].to_numpy())
sample.head()'''),
    code(f'''{CHECK}
print(sample.groupby("stratum").size().to_string())'''),
    md("""
## The projection

Mean-per-unit estimation of the total with the finite-population correction, 95 % two-sided limits.
Read the warnings: the normal approximation needs enough lines for the skewness of each location's values.
"""),
    code('''from auditmean import estimate_total

estimate = estimate_total(sample, locations, method="mpu", confidence=0.95, sides="two-sided")
estimate'''),
    code(f'''{CHECK}
print(f"estimated stock value {{estimate.total:,.2f}}, 95% limits {{estimate.lower:,.2f}} to {{estimate.upper:,.2f}}")
print(f"warnings: {{len(estimate.flags)}}")
true_value = 7_636_221.14  # the invented truth, from demo_data/README.md
print("the invented true value lies within the limits:", estimate.lower <= true_value <= estimate.upper)'''),
]

ANALYST = [
    md("""
# Documenting the work: the finance analyst's workpaper

**Everything in this notebook is invented demo data**: the open invoices of Quillonby Fixings Ltd,
a fictional distributor (see `demo_data/README.md`).

The analyst runs the whole chain into an engagement folder, keeps a coverage check beside it, and
writes the workpaper: an Excel workbook and one self-contained HTML file a reviewer can read and
re-perform (population fingerprint, strata, sample size, seed and keys, what was found, every
method's projection, every warning with its rule and source, the step log).
"""),
    code(SETUP),
    code('''from auditmean.cli.demo import run_demo

eng, population, strata, plan, evaluation = run_demo(work / "receivables-2024", data)
evaluation'''),
    code(f'''{CHECK}
print(eng.status().steps[["step", "done"]].to_string(index=False))'''),
    md("""
## A coverage check, kept in the folder

The workpaper reports every `coverage*.json` in the engagement folder. Here: 400 simulated samples of
the planned design (fixed seed), with 4 % of the invoices overstated by a fifth.
"""),
    code('''from auditmean.widgets import CoveragePanel, EngagementState

state = EngagementState.from_folder(eng.folder)
coverage = CoveragePanel(state, replications=400, seed=7)
coverage.run_button.click()
coverage.wait()
kept = coverage.keep()
coverage'''),
    code(f'''{CHECK}
print(kept.name)
row = state.coverage.by_estimator.set_index("estimator").loc["ratio"]
print(f"ratio estimation: two-sided limits held in {{row['coverage']:.1%}} of {{state.coverage.replications}} simulated samples")'''),
    md("""
## The workpaper

`write_workbook` and `write_html_report` read the engagement folder and write the two files. The
panel below does the same with a button.
"""),
    code('''from auditmean.workpaper import write_html_report, write_workbook

purpose = "Year-end test of the open receivables of Quillonby Fixings Ltd (invented demo data)."
workbook = write_workbook(eng.folder, eng.folder / "receivables-2024.xlsx", purpose=purpose)
report = write_html_report(eng.folder, eng.folder / "receivables-2024.html", purpose=purpose)'''),
    code(f'''{CHECK}
import openpyxl

print(workbook.name, report.name)
print("sheets:", ", ".join(openpyxl.load_workbook(workbook, read_only=True).sheetnames))'''),
    code('''from auditmean.widgets import WorkpaperPanel

WorkpaperPanel(state, purpose=purpose)'''),
]

NOTEBOOKS = {
    "auditor_invoices.ipynb": AUDITOR,
    "stock_count_mpu.ipynb": STOCK,
    "analyst_workpaper.ipynb": ANALYST,
}


def build(cells: list[nbformat.NotebookNode], stem: str) -> nbformat.NotebookNode:
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    nb.cells = [nbformat.from_dict(dict(c)) for c in cells]
    for i, c in enumerate(nb.cells):
        c["id"] = f"{stem}-{i:02d}"  # stable ids: the files change only when the text does
    return nb


def strip(nb: nbformat.NotebookNode) -> nbformat.NotebookNode:
    """Keep only the printed text of the checked cells; nothing else."""
    for c in nb.cells:
        if c.cell_type != "code":
            continue
        c.metadata = {}
        if c.source.startswith(CHECK):
            # nbval reads a cell without an execution count as never run; the count is the
            # cell's place among the code cells, the same on every run
            c.outputs = [o for o in c.outputs if o.get("output_type") == "stream"]
        else:
            c.execution_count = None
            c.outputs = []
    nb.metadata.pop("widgets", None)
    return nb


def main() -> int:
    for name, cells in NOTEBOOKS.items():
        nb = build(cells, Path(name).stem)
        NotebookClient(nb, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(HERE)}}).execute()
        nbformat.write(strip(nb), HERE / name)
        print(f"wrote {HERE / name}")
    app = build([code('''# auditmean's browser app: `auditmean app` serves this notebook with Voila.
# The options of the command arrive as environment variables (see App.from_environment).
import os

os.environ.setdefault("PLOTLY_RENDERER", "plotly_mimetype")

from auditmean.widgets import App

App.from_environment()''')], "app")
    nbformat.write(app, APP_NOTEBOOK)
    print(f"wrote {APP_NOTEBOOK}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
