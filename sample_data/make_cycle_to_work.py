"""Build the invented cycle-to-work demo data (for the demo only).

Scenario: an employer offers a cycle-to-work scheme. Did joining it change
how many days employees were off sick in the following year? The numbers
below are invented; they illustrate the method and describe no real firm.

Structural model (one row per employee; N(0, s) is normal noise with sd s)::

    age                  ~ uniform(20, 64), years
    health_consciousness ~ N(0, 1)                       (never measured)
    department           ~ office 45% | warehouse 30% | field 25%
    commute_km           ~ gamma(shape 2, scale 5) km, capped at 40
    promo_email          ~ Bernoulli(0.5)                (randomly timed)
    fitness              = 50 - 0.4 (age - 40) + 6 health_consciousness
                           + 4 [warehouse] + N(0, 8)
    scheme               ~ Bernoulli(logistic(-0.2 - 0.04 (age - 40)
                           + 0.05 (fitness - 50) - 0.06 (commute_km - 10)
                           + 0.5 [office] - 0.3 [field] + 1.2 promo_email))
    active_minutes       = 100 + 90 scheme + 1.5 (fitness - 50) + N(0, 30)
    sick_days            = 11 + 0.06 (age - 40) - 0.05 (fitness - 50)
                           + 0.05 (commute_km - 10) + 1.0 [warehouse]
                           + 0.5 [field] - 0.8 health_consciousness
                           - 0.6 scheme - 0.01 active_minutes + N(0, 2.2)
    engagement_score     = 50 + 4 scheme - 1.0 sick_days + N(0, 5)

sick_days is recorded to the nearest half day and floored at zero.

True effect: joining the scheme changes sick days by
    -0.6 (direct) + 90 x (-0.01) (through active minutes) = -1.5 days a year
for every employee before rounding and flooring; the truth file also gives
the sample average effect computed from both potential outcomes of every
row (same noise, rounded and floored), which differs from -1.5 only in the
second decimal.
The adjustment sets that identify it include {age, fitness, commute_km,
department}; health_consciousness only reaches the treatment through
fitness, so leaving it unmeasured is harmless once fitness is adjusted for.
promo_email is a valid instrument. Adjusting for the mediator
active_minutes or the collider engagement_score biases the estimate.

Run ``python sample_data/make_cycle_to_work.py`` to rewrite
``cycle_to_work.csv`` and ``cycle_to_work.truth.json`` next to this file.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240611
ROWS = 4000
TRUE_EFFECT = -1.5
DIRECT_EFFECT = -0.6
MINUTES_PER_DAY_EFFECT = -0.01
SCHEME_MINUTES = 90.0
HERE = Path(__file__).resolve().parent


def simulate(rows: int = ROWS, seed: int = SEED) -> pd.DataFrame:
    """Draw ``rows`` employees from the structural model in the module docstring.

    The sample average effect (from both potential outcomes) is left in
    ``frame.attrs["sample_effect"]``.
    """
    rng = np.random.default_rng(seed)
    age = rng.uniform(20, 64, rows)
    health = rng.normal(0, 1, rows)
    department = rng.choice(["office", "warehouse", "field"], size=rows, p=[0.45, 0.30, 0.25])
    warehouse = (department == "warehouse").astype(float)
    office = (department == "office").astype(float)
    field = (department == "field").astype(float)
    commute_km = np.minimum(rng.gamma(2.0, 5.0, rows), 40.0)
    promo_email = rng.binomial(1, 0.5, rows)
    fitness = 50 - 0.4 * (age - 40) + 6 * health + 4 * warehouse + rng.normal(0, 8, rows)
    logit = (
        -0.2 - 0.04 * (age - 40) + 0.05 * (fitness - 50) - 0.06 * (commute_km - 10)
        + 0.5 * office - 0.3 * field + 1.2 * promo_email
    )
    scheme = rng.binomial(1, 1 / (1 + np.exp(-logit)))
    noise_minutes = rng.normal(0, 30, rows)
    noise_days = rng.normal(0, 2.2, rows)

    def minutes_given(joined: np.ndarray) -> np.ndarray:
        return 100 + SCHEME_MINUTES * joined + 1.5 * (fitness - 50) + noise_minutes

    def days_given(joined: np.ndarray) -> np.ndarray:
        raw = (
            11 + 0.06 * (age - 40) - 0.05 * (fitness - 50) + 0.05 * (commute_km - 10)
            + 1.0 * warehouse + 0.5 * field - 0.8 * health
            + DIRECT_EFFECT * joined + MINUTES_PER_DAY_EFFECT * minutes_given(joined)
            + noise_days
        )
        return np.maximum(np.round(raw * 2) / 2, 0.0)

    active_minutes = minutes_given(scheme)
    sick_days = days_given(scheme)
    ones, zeros = np.ones(rows), np.zeros(rows)
    sample_effect = float(np.mean(days_given(ones) - days_given(zeros)))
    engagement = 50 + 4 * scheme - 1.0 * sick_days + rng.normal(0, 5, rows)
    frame = pd.DataFrame(
        {
            "employee_id": np.arange(1, rows + 1),
            "age": np.round(age, 1),
            "department": department,
            "commute_km": np.round(commute_km, 1),
            "fitness": np.round(fitness, 1),
            "promo_email": promo_email,
            "scheme": scheme,
            "active_minutes": np.round(active_minutes, 0),
            "sick_days": sick_days,
            "engagement_score": np.round(engagement, 1),
        }
    )
    frame.attrs["sample_effect"] = sample_effect
    return frame


TRUTH = {
    "scenario": "cycle-to-work scheme and sick days (invented data, demo only)",
    "treatment": "scheme",
    "outcome": "sick_days",
    "true_effect": TRUE_EFFECT,
    "effect_scale": "difference in sick days over the following year, joined minus not joined",
    "direct_effect": DIRECT_EFFECT,
    "indirect_effect_through_active_minutes": SCHEME_MINUTES * MINUTES_PER_DAY_EFFECT,
    "sufficient_adjustment": ["age", "commute_km", "department", "fitness"],
    "instrument": "promo_email",
    "mediator": "active_minutes",
    "collider": "engagement_score",
    "unmeasured": ["health_consciousness"],
    "seed": SEED,
    "rows": ROWS,
}


def main() -> None:
    frame = simulate()
    frame.to_csv(HERE / "cycle_to_work.csv", index=False)
    truth = dict(TRUTH, sample_average_effect=round(frame.attrs["sample_effect"], 4))
    (HERE / "cycle_to_work.truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    print(f"wrote {len(frame)} rows to {HERE / 'cycle_to_work.csv'}")


if __name__ == "__main__":
    main()
