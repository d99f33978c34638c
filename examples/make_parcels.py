"""Generate the demo data: scan events of an invented city parcel-delivery company.

Deterministic (seeded): the same arguments always give the same file. About 1,000,000 rows
of 25 columns in a few seconds. Usage:

    python examples/make_parcels.py [--rows N] [--out examples/data/parcel_scans.parquet]

Then `chainlint profile examples/data/parcel_scans.parquet --name parcel_scans --store
examples/.chainlint` rebuilds the committed profile.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd


def _choice(rng: np.random.Generator, labels: list[str], weights: list[float], rows: int) -> np.ndarray:
    p = np.array(weights, dtype=np.float64)
    return np.array(labels, dtype=object)[rng.choice(len(labels), size=rows, p=p / p.sum())]


def make_parcels(rows: int = 1_000_000, seed: int = 2026) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    depots = ["NORTH", "SOUTH", "EAST", "WEST", "CENTRAL", "HARBOUR", "AIRPORT", "RIVERSIDE", "HILLTOP", "OLDTOWN", "PARKSIDE", "DOCKS"]
    depot = _choice(rng, depots, [18, 15, 14, 13, 11, 8, 6, 5, 4, 3, 2, 1], rows)
    statuses = ["delivered", "in_transit", "out_for_delivery", "at_depot", "failed_attempt", "damaged", "returned", "lost"]
    status = _choice(rng, statuses, [55, 18, 12, 9, 4.5, 0.6, 0.8, 0.1], rows)
    vehicle = _choice(rng, ["van", "e_van", "truck", "bike", "cargo_bike"], [45, 20, 15, 12, 8], rows)
    size = _choice(rng, ["XS", "S", "M", "L", "XL"], [10, 30, 35, 18, 7], rows)
    service = _choice(rng, ["standard", "economy", "express", "same_day"], [55, 25, 15, 5], rows)
    recipient = _choice(rng, ["residential", "business", "locker"], [62, 28, 10], rows)
    zone = np.array([f"Z{k:02d}" for k in range(1, 41)], dtype=object)[np.minimum(rng.zipf(1.6, rows), 40) - 1]
    accounts = np.array([f"SA-{k:05d}" for k in range(1, 4001)], dtype=object)
    sender = accounts[np.minimum(rng.zipf(1.3, rows), 4000) - 1]
    weight = np.round(rng.lognormal(0.4, 0.9, rows), 2)
    value = np.round(rng.lognormal(3.2, 1.3, rows), 2)
    attempts = np.minimum(rng.geometric(0.7, rows) - 1, 5)
    cod = np.where(rng.random(rows) < 0.08, np.round(rng.lognormal(3.5, 0.8, rows), 2), np.nan)
    notes = _choice(rng, ["leave at door", "call on arrival", "fragile", "side entrance", "no neighbours"], [5, 4, 3, 2, 1], rows)
    note = np.where(rng.random(rows) < 0.04, notes, None)
    start = np.datetime64("2026-01-01T00:00:00", "s")
    scan_time = start + rng.integers(0, 180 * 86_400, rows).astype("timedelta64[s]")
    rating = np.where(rng.random(rows) < 0.3, rng.integers(1, 6, rows).astype(np.float64), np.nan)
    frame = pd.DataFrame(
        {
            "event_id": np.arange(1, rows + 1, dtype=np.int64),
            "scan_time": scan_time,
            "depot": pd.array(depot, dtype="str"),
            "zone": pd.array(zone, dtype="str"),
            "service_level": pd.array(service, dtype="str"),
            "status": pd.array(status, dtype="str"),
            "vehicle_type": pd.array(vehicle, dtype="str"),
            "parcel_size": pd.array(size, dtype="str"),
            "weight_kg": weight,
            "declared_value": value,
            "attempts": attempts.astype(np.int64),
            "signature_required": rng.random(rows) < 0.22,
            "recipient_type": pd.array(recipient, dtype="str"),
            "sender_account": pd.array(sender, dtype="str"),
            "driver_id": rng.integers(1, 480, rows, dtype=np.int64),
            "cod_amount": cod,
            "note": pd.array(note, dtype="str"),
            "route_id": rng.integers(1, 120, rows, dtype=np.int64),
            "scan_type": pd.array(_choice(rng, ["pickup", "hub_in", "hub_out", "delivery"], [20, 30, 30, 20], rows), dtype="str"),
            "fragile": rng.random(rows) < 0.07,
            "temperature_controlled": rng.random(rows) < 0.02,
            "distance_km": np.round(rng.gamma(2.0, 4.0, rows), 1),
            "postcode_area": pd.array(np.array([f"P{k:03d}" for k in range(300)], dtype=object)[rng.integers(0, 300, rows)], dtype="str"),
            "customer_rating": rating,
            "insured": rng.random(rows) < 0.12,
        }
    )
    return frame


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--out", type=Path, default=Path(__file__).parent / "data" / "parcel_scans.parquet")
    args = parser.parse_args()
    args.out.parent.mkdir(parents=True, exist_ok=True)
    frame = make_parcels(args.rows, args.seed)
    frame.to_parquet(args.out, index=False)
    print(f"{len(frame):,} rows x {frame.shape[1]} columns -> {args.out}")


if __name__ == "__main__":
    main()
