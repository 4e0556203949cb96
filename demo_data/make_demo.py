"""Generate the invented Formwise demo data set ``demo_data/kiosks.csv``.

Scenario (invented; no real firm, place or person): a chain of 60 coffee kiosks, each
observed for 25 weeks, 1,500 kiosk-weeks in all. One row is one kiosk in one week.

Columns
    kiosk_id         identifier "K001".."K060"
    week             1..25
    region           "Coast" (30 kiosks), "Inland" (18), "Mountain" (12)
    weekly_revenue   revenue in $ that week, 2 decimals (outcome)
    drink_price      price of a standard drink, within 3.00..6.50, 2 decimals
    foot_traffic     weekly passers-by, integer count
    ad_spend         local advertising spend, 2 decimals; about 40 % of weeks are 0
    years_open       years since the kiosk opened, 0.5..12, 1 decimal
    app_order_share  share of orders placed through the app, 0..1, 3 decimals
    promo            1 in a promotion week (about 30 %), else 0
    catering_orders  catering orders that week (count outcome, mostly zeros)

True data-generating process (k = kiosk, t = week; the regressors enter exactly as
rounded in the CSV, so the model holds for the file itself)

    ln(weekly_revenue) = 6.20
                         - 0.80 * ln(drink_price)        elasticity
                         + 0.45 * ln(foot_traffic)       elasticity
                         + 0.03 * asinh(ad_spend)
                         + 0.02 * years_open             semi-elasticity, per year
                         + 0.40 * app_order_share        per unit share (+0.1 -> +0.04)
                         + 0.12 * promo
                         - 0.10 * [region == Inland]     reference: Coast
                         + 0.05 * [region == Mountain]
                         + e_kt,
    e_kt ~ N(0, 0.25^2), independent across kiosk-weeks and of all regressors. The
    noise is multiplicative (log-normal), so a model of revenue in levels is strongly
    heteroskedastic while the log model is not; E[weekly_revenue | x] =
    exp(index + 0.25^2 / 2).

    catering_orders ~ Poisson(mu_kt), independently, with
    ln(mu_kt) = -6.00 + 0.60 * ln(foot_traffic) + 0.50 * promo
                - 0.30 * [region == Inland] + 0.20 * [region == Mountain].

The week number has no effect of its own. Regressors are mildly correlated on purpose
(prices are higher on the Coast and at busier sites, ads are likelier in promotion
weeks, newer kiosks take more app orders), never perfectly collinear.

Run ``python demo_data/make_demo.py`` to (re)write the CSV next to this file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

N_KIOSKS = 60
N_WEEKS = 25
DEFAULT_SEED = 20261201
CSV_PATH = Path(__file__).with_name("kiosks.csv")

REGIONS = ("Coast", "Inland", "Mountain")
# Fixed kiosk counts per region (shuffled): every region gets enough kiosks to estimate.
REGION_KIOSKS = (30, 18, 12)

# True coefficients of ln(weekly_revenue); documented in the module docstring.
REVENUE_TRUE: dict[str, float] = {
    "intercept": 6.20,
    "ln_drink_price": -0.80,
    "ln_foot_traffic": 0.45,
    "asinh_ad_spend": 0.03,
    "years_open": 0.02,
    "app_order_share": 0.40,
    "promo": 0.12,
    "region_Inland": -0.10,
    "region_Mountain": 0.05,
}
NOISE_SD = 0.25
PROMO_SHARE = 0.30

# True coefficients of ln E[catering_orders].
CATERING_TRUE: dict[str, float] = {
    "intercept": -6.00,
    "ln_foot_traffic": 0.60,
    "promo": 0.50,
    "region_Inland": -0.30,
    "region_Mountain": 0.20,
}


def make_kiosks(seed: int = DEFAULT_SEED) -> pd.DataFrame:
    """Return the demo kiosk-week panel; the same seed always gives the same frame."""
    rng = np.random.default_rng(seed)
    n = N_KIOSKS * N_WEEKS

    # Kiosk-level traits, drawn once per kiosk and repeated over its weeks.
    region_k = rng.permutation(np.repeat(np.array(REGIONS), REGION_KIOSKS))
    inland_k = (region_k == "Inland").astype(float)
    mountain_k = (region_k == "Mountain").astype(float)
    # Coast sites are busier; the spread spans hundreds to tens of thousands a week.
    log_traffic_k = 8.2 + 0.3 * (region_k == "Coast") + rng.normal(0.0, 0.8, N_KIOSKS)
    # Prices follow location: Coast and busy sites charge more (mild, not collinear).
    price_k = (
        4.3 + 0.40 * (region_k == "Coast") + 0.20 * mountain_k + 0.15 * (log_traffic_k - 8.3) + rng.normal(0.0, 0.55, N_KIOSKS)
    )
    opened_k = rng.uniform(0.5, 11.5, N_KIOSKS)
    ad_prob_k = rng.beta(5.5, 4.5, N_KIOSKS)
    # Newer kiosks take a larger share of app orders.
    app_mean_k = np.clip(rng.beta(6.0, 14.0, N_KIOSKS) + 0.01 * (6.0 - opened_k), 0.05, 0.8)

    kiosk = np.repeat(np.arange(N_KIOSKS), N_WEEKS)
    week = np.tile(np.arange(1, N_WEEKS + 1), N_KIOSKS)

    # Weekly variation within kiosks, so kiosk-level traits do not absorb every effect.
    promo = (rng.random(n) < PROMO_SHARE).astype(np.int64)
    foot_traffic = np.rint(np.exp(log_traffic_k[kiosk] + rng.normal(0.0, 0.15, n))).astype(np.int64)
    drink_price = np.round(np.clip(price_k[kiosk] + rng.normal(0.0, 0.25, n), 3.0, 6.5), 2)
    # Ads are likelier in promotion weeks; positive spend is right-skewed.
    advertises = rng.random(n) < np.clip(ad_prob_k[kiosk] + 0.15 * promo, 0.0, 1.0)
    ad_spend = np.round(np.where(advertises, np.exp(rng.normal(5.3, 0.9, n)), 0.0), 2)
    years_open = np.round(np.clip(opened_k[kiosk] + (week - 1) / 52.0, 0.5, 12.0), 1)
    concentration = 40.0
    app_order_share = np.round(
        rng.beta(concentration * app_mean_k[kiosk], concentration * (1.0 - app_mean_k[kiosk])),
        3,
    )

    b = REVENUE_TRUE
    # The index uses the rounded regressors so the documented model holds for the CSV.
    log_revenue = (
        b["intercept"]
        + b["ln_drink_price"] * np.log(drink_price)
        + b["ln_foot_traffic"] * np.log(foot_traffic)
        + b["asinh_ad_spend"] * np.arcsinh(ad_spend)
        + b["years_open"] * years_open
        + b["app_order_share"] * app_order_share
        + b["promo"] * promo
        + b["region_Inland"] * inland_k[kiosk]
        + b["region_Mountain"] * mountain_k[kiosk]
        + rng.normal(0.0, NOISE_SD, n)
    )
    weekly_revenue = np.round(np.exp(log_revenue), 2)

    c = CATERING_TRUE
    log_mu = (
        c["intercept"]
        + c["ln_foot_traffic"] * np.log(foot_traffic)
        + c["promo"] * promo
        + c["region_Inland"] * inland_k[kiosk]
        + c["region_Mountain"] * mountain_k[kiosk]
    )
    catering_orders = rng.poisson(np.exp(log_mu)).astype(np.int64)

    return pd.DataFrame(
        {
            "kiosk_id": [f"K{k + 1:03d}" for k in kiosk],
            "week": week.astype(np.int64),
            "region": region_k[kiosk].astype(str).tolist(),
            "weekly_revenue": weekly_revenue,
            "drink_price": drink_price,
            "foot_traffic": foot_traffic,
            "ad_spend": ad_spend,
            "years_open": years_open,
            "app_order_share": app_order_share,
            "promo": promo,
            "catering_orders": catering_orders,
        }
    )


def main() -> None:
    """Write the demo CSV next to this script."""
    frame = make_kiosks()
    # Fixed line ending and encoding so the file is byte-identical on every platform.
    frame.to_csv(CSV_PATH, index=False, encoding="utf-8", lineterminator="\n")
    print(f"wrote {len(frame)} rows to {CSV_PATH}")


if __name__ == "__main__":
    main()
