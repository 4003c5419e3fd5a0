# %% [markdown]
# # A tour of discaudit in a notebook
#
# Audit the invented plastic-flake data (`examples/make_flake_data.py`) before choosing a
# discriminant classifier, then look behind the verdict. Each `# %%` block is a notebook cell
# (Jupyter, VS Code and others read this layout); run the file as a script to see it all.
# In a notebook, a cell that ends with `verdict` shows the verdict as an HTML table.

# %%
from __future__ import annotations

import json
import sys
from pathlib import Path

import pandas as pd

import discaudit

HERE = Path(__file__).resolve().parent if "__file__" in globals() else Path("examples").resolve()
DATA = HERE / "data" / "flakes.csv"
if DATA.exists():
    flakes = pd.read_csv(DATA, index_col="flake_id")
else:  # not written yet (`make demo` writes it): simulate it, seeded
    sys.path.insert(0, str(HERE))
    from make_flake_data import make_flakes

    flakes, _ = make_flakes()
flakes.head()

# %% [markdown]
# ## The verdict
# One call; nothing is fitted. `random_state` makes the robust fits reproducible.

# %%
verdict = discaudit.preflight(flakes, target="family", random_state=0)
print(verdict)  # in a notebook, `verdict` alone renders the HTML table

# %% [markdown]
# ## One row per check, as a DataFrame

# %%
table = verdict.to_frame()
print(table[["check", "status", "figure"]].to_string(index=False))
print("\nChecks that fail the gate:", table.loc[table["status"] == "fail", "check"].tolist())

# %% [markdown]
# ## Behind a finding: collinearity
# `details` holds every statistic and the thresholds applied, as plain JSON values.

# %%
collinearity = verdict.findings["collinearity"]
print(collinearity.summary)
vif = pd.Series(collinearity.details["vif_within"], name="VIF (pooled within-class)")
print(vif.sort_values(ascending=False).round(1).to_string())
print("thresholds:", collinearity.details["thresholds"])

# %% [markdown]
# ## Behind a finding: outlying flakes
# Rows are named by the DataFrame index (`flake_id`), so they can be looked up directly.

# %%
outliers = verdict.findings["outliers"]
print(outliers.summary)
# verdict.outlier_rows(): every flagged row, indexed by flake_id, with its squared robust distance,
# its class's cut-off and far-out fence (a row is flagged beyond both), farthest first per class
flagged = verdict.outlier_rows().sort_values("squared_distance", ascending=False)
if not flagged.empty:
    print(flagged.head(8).round(1).to_string())
    print(flakes.loc[flagged.index[:3], ["nir_1100", "nir_1400", "thickness_um", "family"]])

# %% [markdown]
# ## The recommendation and its reasons

# %%
rec = verdict.recommendation
print(rec.model, rec.params)
for reason in rec.reasons:
    print("-", reason)

# %% [markdown]
# ## Policy as configuration
# The gate judges the model you ship: only the findings that bear on it fail it. Without a
# model it asks whether the data are usable and fit for some candidate. `model` (and `fail_on`)
# can also live in `[tool.discaudit]` of pyproject.toml for the command line (`--model`).

# %%
print(verdict.gate.outcome)
for model in ("lda", "regularized_lda", "qda", "logistic_regression"):
    gated = discaudit.preflight(flakes, target="family", config=discaudit.Config(model=model), random_state=0)
    print(f"{model:20s}", gated.gate.headline, gated.gate.failing_checks)
print(gated.gate.rule)

# %% [markdown]
# A team may also make a check advisory: it is still shown, but it never fails a gate. The same
# setting can live in `[tool.discaudit.severity]` of pyproject.toml.

# %%
relaxed = discaudit.Config(model="qda", severity={"normality": "advisory"})
relaxed_verdict = discaudit.preflight(flakes, target="family", config=relaxed, random_state=0)
print("worst check status:", verdict.status, "->", relaxed_verdict.status, "|", relaxed_verdict.gate.outcome)
print(relaxed_verdict.to_frame().query("severity == 'advisory'")[["check", "status", "severity"]])

# %% [markdown]
# ## Reports to share
# Markdown for a pull-request comment, JSON for machines (versioned schema), JUnit XML for CI.

# %%
print(verdict.to_markdown()[:600], "...")
document = json.loads(verdict.to_json())
print("schema_version", document["schema_version"], "| checks:", ", ".join(document["findings"]))
