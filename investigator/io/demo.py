"""The built-in demo: invented expense claims of a fictional company, with planted cases.

Brindlemoor Field Instruments (a company that does not exist) repays its staff for work trips: mileage,
hotel nights and meals, plus small local supply runs. A year of claims is generated from fixed rules with a
fixed seed, and three kinds of cases are planted:

* lone keying errors: an amount with an extra digit, a distance typed ten times too long, 20 nights
  instead of 2, a claim submitted 310 days late instead of 31;
* a pattern: seven near-identical supply-run claims by one employee on one evening, each just under the
  500.00 approval limit (a split purchase);
* combinations: trips where each value is ordinary on its own but the amount does not fit the distance and
  nights (a long trip repaid as if it were a short one, and the other way round);
* timing: the company works Monday to Friday, except public holidays in England, yet three trips are dated on
  a weekend and one on Good Friday;
* a peer case: Finance staff only make short day trips (customer visits and training), but one Finance claim
  is a long installation trip with a hotel night, ordinary for the company, unusual for its department.

``DEMO_OPTIONS`` are the options the ``demo`` command scans with (the holidays of England and the 500.00
approval limit); ``--within department`` finds the peer case.

Every value here is invented; any likeness to a real company or person is chance.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

DEMO_FILE = "brindlemoor_expense_claims.csv"
DEMO_ID = "claim_id"
DEMO_OPTIONS = {"id": DEMO_ID, "holidays": "GB-ENG", "threshold": "amount=500"}
# Public holidays of England in 2025 (the `holidays` package, GB-ENG), written out so that making the demo
# needs no package: the test of the demo checks them against it.
HOLIDAYS_2025 = ("2025-01-01", "2025-04-18", "2025-04-21", "2025-05-05", "2025-05-26", "2025-08-25",
                 "2025-12-25", "2025-12-26")
N_CLAIMS = 2400
PURPOSES = {"customer visit": 0.34, "installation": 0.30, "training": 0.14, "trade fair": 0.08,
            "supply run": 0.14}
DEPARTMENTS = ["Field Service", "Sales", "Engineering", "Logistics", "Finance"]
MILEAGE_RATE = 0.35  # per km
NOTES = {
    "customer visit": "Visit to customer site, mileage and meals",
    "installation": "Installation of gauges at client plant",
    "training": "Training course travel and accommodation",
    "trade fair": "Trade fair stand duty, hotel and meals",
    "supply run": "Local purchase of spare parts and consumables",
}


def _claim_amount(rng, km, nights, purpose):
    meals = (nights + 1) * rng.uniform(4, 12)
    hotel = nights * rng.uniform(95, 140)
    rate = MILEAGE_RATE * rng.lognormal(0.0, 0.12)  # car classes, tolls and parking differ
    return round(rate * km + hotel + meals, 2)


def make_demo(seed: int = 2024) -> tuple[pd.DataFrame, dict[str, list[str]]]:
    """The demo claims and the planted cases' claim ids by kind."""
    rng = np.random.default_rng(seed)
    employees = [f"E{100 + i}" for i in range(36)]
    weights = 1.0 / np.arange(1, 37) ** 0.6
    weights /= weights.sum()
    dept_of = {e: DEPARTMENTS[rng.choice(5, p=[0.35, 0.25, 0.2, 0.12, 0.08])] for e in employees}
    dates = pd.Timestamp("2025-01-02") + pd.to_timedelta(rng.integers(0, 360, N_CLAIMS), unit="D")
    # Claims are dated on working days: a weekend or holiday date moves to the next working day.
    dates = pd.to_datetime(np.busday_offset(dates.to_numpy(dtype="datetime64[D]"), 0, roll="forward",
                                            holidays=list(HOLIDAYS_2025)))
    rows = []
    for i in range(N_CLAIMS):
        purpose = rng.choice(list(PURPOSES), p=list(PURPOSES.values()))
        km = rng.lognormal(np.log(90 if purpose == "supply run" else 130), 0.6)
        nights = int(min(4, rng.poisson((km - 180) / 220))) if km > 180 else 0
        emp = employees[rng.choice(36, p=weights)]
        rows.append({
            "claim_id": f"CLM-{10001 + i}",  # CLM: claim
            "claim_date": dates[i].date().isoformat(),
            "employee": emp,
            "department": dept_of[emp],
            "purpose": purpose,
            "distance_km": round(km, 1),
            "nights": nights,
            "amount": _claim_amount(rng, km, nights, purpose),
            "submitted_hour": int(np.clip(rng.normal(14, 2.3), 7, 20)),
            "days_to_submit": int(rng.gamma(2.0, 3.5)),
            "note": NOTES[purpose],
        })
    frame = pd.DataFrame(rows)
    planted: dict[str, list[str]] = {"keying error": [], "pattern": [], "combination": []}

    def pick(condition) -> int:
        candidates = np.flatnonzero(condition & ~frame.index.isin(used))
        i = int(rng.choice(candidates))
        used.append(i)
        return i

    used: list[int] = []
    trip = frame["purpose"] != "supply run"
    # Lone keying errors: one field mistyped, the rest of the claim as it was.
    i = pick(trip & frame["amount"].between(900, 2000))
    frame.loc[i, "amount"] = round(frame.loc[i, "amount"] * 10, 2)
    planted["keying error"].append(frame.loc[i, "claim_id"])
    i = pick(trip & frame["distance_km"].between(250, 600))
    frame.loc[i, "distance_km"] = round(frame.loc[i, "distance_km"] * 10, 1)
    planted["keying error"].append(frame.loc[i, "claim_id"])
    i = pick(frame["nights"] == 2)
    frame.loc[i, "nights"] = 20
    planted["keying error"].append(frame.loc[i, "claim_id"])
    i = pick(frame["days_to_submit"] == 3)
    frame.loc[i, "days_to_submit"] = 310
    planted["keying error"].append(frame.loc[i, "claim_id"])
    # A pattern: seven supply runs by one employee on one evening, each just under the approval limit.
    day = "2025-09-18"
    for _ in range(7):
        i = pick(frame["purpose"] == "supply run")
        frame.loc[i, ["claim_date", "employee", "department", "distance_km", "nights", "amount",
                      "submitted_hour", "days_to_submit"]] = [
            day, "E117", dept_of["E117"], round(rng.uniform(4, 7), 1), 0,
            round(rng.uniform(486, 499.5), 2), int(rng.choice([21, 22])), int(rng.choice([0, 1]))]
        planted["pattern"].append(frame.loc[i, "claim_id"])
    # Combinations: each value ordinary alone, the amount wrong for the distance and nights.
    for km, nights, amount in [(420.0, 0, 58.0), (16.0, 0, 395.0), (240.0, 0, 31.0), (9.5, 0, 260.0)]:
        i = pick(trip & (frame["nights"] == 0))
        frame.loc[i, ["distance_km", "nights", "amount"]] = [km, nights, amount]
        planted["combination"].append(frame.loc[i, "claim_id"])
    # Finance staff make short day trips only (customer visits and training, no hotel): their claims (none
    # planted above) become such trips.
    finance = np.flatnonzero((frame["department"] == "Finance").to_numpy() & ~frame.index.isin(used))
    for i in finance.tolist():
        purpose = str(rng.choice(["customer visit", "training"], p=[0.6, 0.4]))
        km = round(float(rng.lognormal(np.log(45), 0.35)), 1)
        frame.loc[i, ["purpose", "distance_km", "nights", "amount", "note"]] = [
            purpose, km, 0, _claim_amount(rng, km, 0, purpose), NOTES[purpose]]
    planted["timing"], planted["peer"] = [], []
    # Timing: three trips dated on a weekend, one on Good Friday.
    for day in ("2025-03-15", "2025-06-29", "2025-10-12", "2025-04-18"):
        i = pick(trip & (frame["department"] != "Finance"))
        frame.loc[i, "claim_date"] = day
        planted["timing"].append(frame.loc[i, "claim_id"])
    # A peer case: a long installation trip with a hotel night, claimed by a Finance employee.
    i = pick((frame["department"] == "Finance").to_numpy())
    frame.loc[i, ["purpose", "distance_km", "nights", "amount", "note"]] = [
        "installation", 380.0, 1, _claim_amount(rng, 380.0, 1, "installation"), NOTES["installation"]]
    planted["peer"].append(frame.loc[i, "claim_id"])
    return frame, planted


def write_demo(folder: Path, seed: int = 2024) -> Path:
    frame, _ = make_demo(seed)
    path = Path(folder) / DEMO_FILE
    frame.to_csv(path, index=False)
    return path


def is_current_demo(path: Path, seed: int = 2024) -> bool:
    """Whether the file at ``path`` is the demo as :func:`write_demo` writes it now (byte for byte)."""
    frame, _ = make_demo(seed)
    try:
        return Path(path).read_bytes() == frame.to_csv(index=False).encode("utf-8")
    except OSError:
        return False
