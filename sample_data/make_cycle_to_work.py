"""Build the invented bike-lease demo data (for the demo only).

Scenario: an employer lets staff lease a bike through its cycle-to-work offer,
paid from salary. The offer is open all year, so leases start on any day of
2025. Did leasing a bike change how many days staff were off sick in the
calendar year 2026? Sick days are a count of whole days. The numbers below
are invented; they illustrate the method and describe no real firm or person.

Structural model (one row per employee; N(0, s) is normal noise with sd s)::

    age                  ~ uniform(20, 64), years on 1 January 2025
    health_consciousness ~ N(0, 1)                       (never measured)
    department           ~ office 45% | warehouse 30% | field 25%
    commute_km           ~ gamma(shape 2, scale 5) km, capped at 40
    voucher_draw         ~ Bernoulli(0.5)                (staff lottery)
    fitness              = 50 - 0.4 (age - 40) + 6 health_consciousness
                           + 4 [warehouse] + N(0, 8)
    bike_lease           ~ Bernoulli(logistic(-0.2 - 0.04 (age - 40)
                           + 0.05 (fitness - 50) - 0.06 (commute_km - 10)
                           + 0.5 [office] - 0.3 [field] + 1.2 voucher_draw))
    lease_start          ~ a day of 2025 (uniform) for lessees, blank otherwise
    active_minutes       = 100 + 90 bike_lease + 1.5 (fitness - 50) + N(0, 30)
    rate                 = 11 + 0.06 (age - 40) - 0.05 (fitness - 50)
                           + 0.05 (commute_km - 10) + 1.0 [warehouse]
                           + 0.5 [field] - 0.8 health_consciousness
                           - 0.6 bike_lease - 0.01 active_minutes
    sick_days            ~ Poisson(max(rate, 0.5) x frailty),
                           frailty ~ gamma(shape 6, scale 1/6)   (mean 1)
    engagement_score     = 50 + 4 bike_lease - 1.0 sick_days + N(0, 5)

sick_days is a whole number of days in the calendar year 2026: a count with
more spread than a Poisson count (the frailty), whose mean is linear in its
causes, so a linear model of the mean is correctly specified.

True effect: leasing a bike changes the expected sick days in 2026 by
    -0.6 (direct) + 90 x (-0.01) (through active minutes) = -1.5 days
for every employee whose rate stays above the 0.5 floor (all but a handful).
The truth file also gives the sample average effect computed from both
potential outcomes of every row (same frailty and the same uniform draw fed
to the Poisson quantile function), which is close to -1.5 but not equal.
The adjustment sets that identify it include {age, fitness, commute_km,
department}; health_consciousness only reaches the treatment through
fitness, so leaving it unmeasured is harmless once fitness is adjusted for.
voucher_draw is a valid instrument (the lottery winners got a voucher towards
a leased bike and nothing else). Adjusting for the mediator active_minutes
or the collider engagement_score biases the estimate. lease_start is in the
file for reading only; it is not a variable of the diagram.

Run ``python sample_data/make_cycle_to_work.py`` to rewrite
``cycle_to_work.csv`` and ``cycle_to_work.truth.json`` next to this file.
"""

from __future__ import annotations

import json
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.stats import poisson

SEED = 20250107
ROWS = 4000
TRUE_EFFECT = -1.5
DIRECT_EFFECT = -0.6
MINUTES_PER_DAY_EFFECT = -0.01
LEASE_MINUTES = 90.0
RATE_FLOOR = 0.5
FRAILTY_SHAPE = 6.0
LEASE_YEAR = 2025
HERE = Path(__file__).resolve().parent


def _lease_dates(leased: np.ndarray, rng: np.random.Generator) -> list[str | None]:
    first = date(LEASE_YEAR, 1, 1)
    days = (date(LEASE_YEAR + 1, 1, 1) - first).days
    offsets = rng.integers(0, days, leased.size)
    return [(first + timedelta(days=int(o))).isoformat() if t else None for t, o in zip(leased, offsets)]


def simulate(rows: int = ROWS, seed: int = SEED) -> pd.DataFrame:
    """Draw ``rows`` employees from the structural model in the module docstring.

    The sample average effect (from both potential outcomes) is left in
    ``frame.attrs["sample_effect"]``, the share of rows whose rate hit the
    floor in ``frame.attrs["floored"]``.
    """
    rng = np.random.default_rng(seed)
    age = rng.uniform(20, 64, rows)
    health = rng.normal(0, 1, rows)
    department = rng.choice(["office", "warehouse", "field"], size=rows, p=[0.45, 0.30, 0.25])
    warehouse = (department == "warehouse").astype(float)
    office = (department == "office").astype(float)
    field = (department == "field").astype(float)
    commute_km = np.minimum(rng.gamma(2.0, 5.0, rows), 40.0)
    voucher_draw = rng.binomial(1, 0.5, rows)
    fitness = 50 - 0.4 * (age - 40) + 6 * health + 4 * warehouse + rng.normal(0, 8, rows)
    logit = (
        -0.2 - 0.04 * (age - 40) + 0.05 * (fitness - 50) - 0.06 * (commute_km - 10)
        + 0.5 * office - 0.3 * field + 1.2 * voucher_draw
    )
    bike_lease = rng.binomial(1, 1 / (1 + np.exp(-logit)))
    lease_start = _lease_dates(bike_lease, rng)
    noise_minutes = rng.normal(0, 30, rows)
    frailty = rng.gamma(FRAILTY_SHAPE, 1 / FRAILTY_SHAPE, rows)
    uniform = rng.uniform(0, 1, rows)

    def minutes_given(leased: np.ndarray) -> np.ndarray:
        return 100 + LEASE_MINUTES * leased + 1.5 * (fitness - 50) + noise_minutes

    def rate_given(leased: np.ndarray) -> np.ndarray:
        return (
            11 + 0.06 * (age - 40) - 0.05 * (fitness - 50) + 0.05 * (commute_km - 10)
            + 1.0 * warehouse + 0.5 * field - 0.8 * health
            + DIRECT_EFFECT * leased + MINUTES_PER_DAY_EFFECT * minutes_given(leased)
        )

    def days_given(leased: np.ndarray) -> np.ndarray:
        return poisson.ppf(uniform, np.maximum(rate_given(leased), RATE_FLOOR) * frailty)

    active_minutes = minutes_given(bike_lease)
    sick_days = days_given(bike_lease).astype(int)
    ones, zeros = np.ones(rows), np.zeros(rows)
    sample_effect = float(np.mean(days_given(ones) - days_given(zeros)))
    floored = float(np.mean(np.minimum(rate_given(ones), rate_given(zeros)) < RATE_FLOOR))
    engagement = 50 + 4 * bike_lease - 1.0 * sick_days + rng.normal(0, 5, rows)
    frame = pd.DataFrame(
        {
            "employee_id": np.arange(1, rows + 1),
            "age": np.round(age, 1),
            "department": department,
            "commute_km": np.round(commute_km, 1),
            "fitness": np.round(fitness, 1),
            "voucher_draw": voucher_draw,
            "bike_lease": bike_lease,
            "lease_start": lease_start,
            "active_minutes": np.round(active_minutes, 0),
            "sick_days": sick_days,
            "engagement_score": np.round(engagement, 1),
        }
    )
    frame.attrs["sample_effect"] = sample_effect
    frame.attrs["floored"] = floored
    return frame


TRUTH = {
    "scenario": "bike leases through an employer's cycle-to-work offer and sick days (invented data, demo only)",
    "treatment": "bike_lease",
    "outcome": "sick_days",
    "outcome_kind": "count of whole days off sick in the calendar year 2026 (overdispersed; mean linear in its causes)",
    "lease_year": LEASE_YEAR,
    "true_effect": TRUE_EFFECT,
    "effect_scale": "difference in expected sick days in 2026, leased a bike in 2025 minus did not",
    "direct_effect": DIRECT_EFFECT,
    "indirect_effect_through_active_minutes": LEASE_MINUTES * MINUTES_PER_DAY_EFFECT,
    "sufficient_adjustment": ["age", "commute_km", "department", "fitness"],
    "instrument": "voucher_draw",
    "mediator": "active_minutes",
    "collider": "engagement_score",
    "unmeasured": ["health_consciousness"],
    "not_in_diagram": ["employee_id", "lease_start"],
    "seed": SEED,
    "rows": ROWS,
}


def main() -> None:
    frame = simulate()
    frame.to_csv(HERE / "cycle_to_work.csv", index=False)
    truth = dict(TRUTH, sample_average_effect=round(frame.attrs["sample_effect"], 4),
                 share_of_rows_at_rate_floor=round(frame.attrs["floored"], 4))
    (HERE / "cycle_to_work.truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    print(f"wrote {len(frame)} rows to {HERE / 'cycle_to_work.csv'}")


if __name__ == "__main__":
    main()
