"""Demo pipeline: daily reports over the scan events of a city parcel-delivery company.

Every chain here is written the way people write them first: in the order the questions come
to mind, not the order that is cheap to run. chainlint reads this file; it never runs it.
"""

import pandas as pd

SCANS = "data/parcel_scans.parquet"


def west_damaged_heavy(scans: pd.DataFrame) -> pd.DataFrame:
    # The heavy filter keeps most rows; the rare status should run first.
    return (
        scans
        .loc[lambda d: d["weight_kg"] > 0.5]
        .loc[lambda d: d["depot"] == "WEST"]
        .loc[lambda d: d["status"] == "damaged"]
    )


def cash_parcels_to_review() -> pd.DataFrame:
    scans = pd.read_parquet(SCANS)  # chainlint: profile=parcel_scans
    review = scans[scans.service_level.isin(["standard", "economy", "express"])]
    review = review[review.vehicle_type != "bike"]
    review = review.dropna(subset=["cod_amount"])
    review = review.query("attempts >= 3")
    return review


def above_average_value(scans: pd.DataFrame) -> pd.DataFrame:
    # The mean is taken over the rows the step receives: it must not move.
    return (
        scans
        .query("recipient_type == 'business'")
        .loc[lambda d: d.declared_value > d.declared_value.mean()]
        .query("zone == 'Z07'")
    )


def returned_by_van(scans: pd.DataFrame) -> pd.DataFrame:
    # Already in a good order: the rare status first.
    return scans[scans.status == "returned"].loc[lambda d: d.vehicle_type == "van"]


def fragile_large(scans: pd.DataFrame) -> pd.DataFrame:
    # `XXL` is not a parcel size this company uses.
    return scans.query("parcel_size == 'XXL'").query("signature_required == True")
