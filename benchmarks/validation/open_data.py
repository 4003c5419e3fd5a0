"""Open data sets shipped with scikit-learn, statsmodels and pingouin, as (X DataFrame, y Series).

scikit-learn: iris, wine, breast cancer, digits (64 pixels, some constant: the audit sets
them aside and every candidate pipeline drops columns constant in its training folds).

statsmodels (every data set in ``statsmodels.datasets`` with a class variable; the others
have a continuous, count or proportion outcome, or too few rows to cross-validate):

``anes96_vote``
    1996 American National Election Study extract: ``vote`` (0/1) from the other nine
    recorded variables (``logpopul`` is dropped: it is ``log(popul + 0.1)``).
``fair_affair``
    Fair's extramarital-affairs survey: class ``affairs > 0`` from the eight other items.
``spector_grade``
    Spector & Mazzeo's teaching-method data: ``GRADE`` (improved or not) from GPA, TUCE, PSI
    (32 rows).
``modechoice_mode``
    Greene's travel-mode data reshaped to one row per traveller: the chosen mode (air,
    train, bus, car) from household income, party size and the four modes' terminal time,
    in-vehicle cost, in-vehicle time and generalized cost (18 columns; the car's terminal
    time is always 0, so constant).

pingouin (a test dependency of the project; its ``read_dataset`` reads CSV files shipped
inside the package). Of its data sets these have a class variable that is an outcome or a
natural label; the others are repeated-measures or ANOVA layouts with one response, or have
no class variable:

``penguins_species``
    Palmer penguins: species (Adelie, Chinstrap, Gentoo) from bill length, bill depth,
    flipper length and body mass (the two rows with no measurements dropped; island and sex
    left out).
``heart_disease``
    pingouin's ``chi2_independence`` data set, the Cleveland heart-disease data: ``target``
    (disease or not) from the 13 recorded variables (binary, ordinal-coded and continuous).
``drug_trial_condition``
    pingouin's ``multivariate`` data set: drug or placebo from three health outcomes
    (fever, pressure, aches); 36 rows.

Added with the second held-out batch (2026-12-03; never scored before):

``ccard_ownrent``
    statsmodels' ``ccard`` (Greene's credit-card expenditure data, 72 rows): whether the
    cardholder owns their home (``OWNRENT``) from average expenditure, age and income
    (``INCOMESQ`` is dropped: it is ``INCOME`` squared).
``tips_time``
    pingouin's ``tips`` (one waiter's tips, 244 rows): lunch or dinner from the total bill, the
    tip, the party size, and the sex of the payer and whether the party smoked (coded 0/1); the
    day of the week is left out (it nearly fixes the meal).
``ancova_method``
    pingouin's ``ancova`` (36 students): the teaching method (A, B, C, D) from the score, the
    family income and the BMI.

Added with the third held-out batch (2026-12-03; never scored before):

``grunfeld_firm``
    statsmodels' ``grunfeld`` (Grunfeld's investment panel, 11 firms x 20 years): the firm from
    its gross investment, market value and capital stock (the year is left out). Many classes
    of 20 rows each.
``randhie_health``
    statsmodels' ``randhie`` (RAND health insurance experiment, 20,190 person-years): the
    self-rated health (excellent, good, fair, poor: the three dummies ``hlthg``, ``hlthf``,
    ``hlthp`` with excellent as their base) from the visits, coinsurance, deductible, income,
    spending limit, physical limitations and disease count; strongly imbalanced.
``mixed_anova_group``
    pingouin's ``mixed_anova`` (60 subjects, memory scores in August, January and June),
    reshaped to one row per subject: control or meditation group from the three scores.
``mediation_ybin``
    pingouin's ``mediation`` (100 rows): the binary outcome ``Ybin`` from ``X``, ``M``, ``W1``
    and ``W2`` (``Y`` and ``Mbin`` are left out: they are the same quantities in other codings).

Data sets that the installed packages fetch from the network (scikit-learn's ``fetch_*``,
statsmodels' ``get_rdataset``, seaborn's ``load_dataset``) are not used.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd


def _sk(loader: Callable) -> tuple[pd.DataFrame, pd.Series]:
    bunch = loader(as_frame=True)
    return bunch.data.astype(float), bunch.target.rename("class")


def iris():
    from sklearn.datasets import load_iris

    return _sk(load_iris)


def wine():
    from sklearn.datasets import load_wine

    return _sk(load_wine)


def breast_cancer():
    from sklearn.datasets import load_breast_cancer

    return _sk(load_breast_cancer)


def digits():
    from sklearn.datasets import load_digits

    return _sk(load_digits)


def anes96_vote():
    from statsmodels.datasets import anes96

    df = anes96.load_pandas().data
    y = df["vote"].astype(int).rename("vote")
    X = df.drop(columns=["vote", "logpopul"]).astype(float)
    return X, y


def fair_affair():
    from statsmodels.datasets import fair

    df = fair.load_pandas().data
    y = (df["affairs"] > 0).astype(int).rename("had_affair")
    return df.drop(columns=["affairs"]).astype(float), y


def spector_grade():
    from statsmodels.datasets import spector

    df = spector.load_pandas().data
    return df.drop(columns=["GRADE"]).astype(float), df["GRADE"].astype(int).rename("grade")


def modechoice_mode():
    from statsmodels.datasets import modechoice

    df = modechoice.load_pandas().data
    names = {1: "air", 2: "train", 3: "bus", 4: "car"}
    df = df.assign(mode=df["mode"].astype(int).map(names))
    wide = df.pivot(index="individual", columns="mode", values=["ttme", "invc", "invt", "gc"])
    wide.columns = [f"{var}_{mode}" for var, mode in wide.columns]
    person = df.groupby("individual")[["hinc", "psize"]].first()
    chosen = df.loc[df["choice"] == 1].set_index("individual")["mode"].rename("mode")
    X = person.join(wide).astype(float)
    return X, chosen.loc[X.index]


def _pingouin(name: str) -> pd.DataFrame:
    import pingouin

    return pingouin.read_dataset(name)


def penguins_species():
    df = _pingouin("penguins")
    cols = ["bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"]
    df = df.dropna(subset=cols).reset_index(drop=True)
    return df[cols].astype(float), df["species"].astype(str).rename("species")


def heart_disease():
    df = _pingouin("chi2_independence")
    return df.drop(columns=["target"]).astype(float), df["target"].astype(int).rename("disease")


def drug_trial_condition():
    df = _pingouin("multivariate")
    return df.drop(columns=["Condition"]).astype(float), df["Condition"].astype(str).rename("condition")


def ccard_ownrent():
    from statsmodels.datasets import ccard

    df = ccard.load_pandas().data
    y = df["OWNRENT"].astype(int).rename("owns_home")
    return df[["AVGEXP", "AGE", "INCOME"]].astype(float), y


def tips_time():
    df = _pingouin("tips")
    X = (
        df[["total_bill", "tip", "size"]]
        .astype(float)
        .assign(female=(df["sex"] == "Female").astype(float), smoker=(df["smoker"] == "Yes").astype(float))
    )
    return X, df["time"].astype(str).rename("time")


def ancova_method():
    df = _pingouin("ancova")
    return df[["Scores", "Income", "BMI"]].astype(float), df["Method"].astype(str).rename("method")


def grunfeld_firm():
    from statsmodels.datasets import grunfeld

    df = grunfeld.load_pandas().data
    return df[["invest", "value", "capital"]].astype(float), df["firm"].astype(str).rename("firm")


def randhie_health():
    from statsmodels.datasets import randhie

    df = randhie.load_pandas().data
    health = np.select(
        [df["hlthp"] == 1, df["hlthf"] == 1, df["hlthg"] == 1], ["poor", "fair", "good"], default="excellent"
    )
    X = df[["mdvis", "lncoins", "idp", "lpi", "fmde", "physlm", "disea"]].astype(float)
    return X, pd.Series(health, index=df.index, name="health")


def mixed_anova_group():
    df = _pingouin("mixed_anova")
    wide = df.pivot(index="Subject", columns="Time", values="Scores")
    wide.columns = [f"score_{t.lower()}" for t in wide.columns]
    group = df.groupby("Subject")["Group"].first().astype(str).rename("group")
    return wide.astype(float), group.loc[wide.index]


def mediation_ybin():
    df = _pingouin("mediation")
    return df[["X", "M", "W1", "W2"]].astype(float), df["Ybin"].astype(int).rename("ybin")


OPEN_DATA: dict[str, tuple[str, Callable[[], tuple[pd.DataFrame, pd.Series]]]] = {
    "iris": ("scikit-learn", iris),
    "wine": ("scikit-learn", wine),
    "breast_cancer": ("scikit-learn", breast_cancer),
    "digits": ("scikit-learn", digits),
    "anes96_vote": ("statsmodels", anes96_vote),
    "fair_affair": ("statsmodels", fair_affair),
    "spector_grade": ("statsmodels", spector_grade),
    "modechoice_mode": ("statsmodels", modechoice_mode),
    "penguins_species": ("pingouin", penguins_species),
    "heart_disease": ("pingouin", heart_disease),
    "drug_trial_condition": ("pingouin", drug_trial_condition),
    "ccard_ownrent": ("statsmodels", ccard_ownrent),
    "tips_time": ("pingouin", tips_time),
    "ancova_method": ("pingouin", ancova_method),
    "grunfeld_firm": ("statsmodels", grunfeld_firm),
    "randhie_health": ("statsmodels", randhie_health),
    "mixed_anova_group": ("pingouin", mixed_anova_group),
    "mediation_ybin": ("pingouin", mediation_ybin),
}


def describe(X: pd.DataFrame, y: pd.Series) -> str:
    counts = y.value_counts().sort_index()
    return f"n={len(y)}, p={X.shape[1]}, K={len(counts)}, class sizes {'/'.join(str(int(c)) for c in counts)}"


if __name__ == "__main__":
    for name, (source, load) in OPEN_DATA.items():
        X, y = load()
        print(f"{name:16s} {source:12s} {describe(X, y)}; constant columns: {int((X.nunique() <= 1).sum())}")
        assert np.isfinite(X.to_numpy()).all()
