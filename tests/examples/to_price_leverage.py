"""Reference check for examples/data/laptops_to_price.csv (run by laptops_to_price_test.cpp).

Fits the demo's true-model terms (examples/laptop_listings.h) by numpy's QR on the rows of
examples/data/laptops.csv that the stepwise BIC plan uses (no missing cell in any of its
columns), and prints, as JSON, the largest fitted leverage, each to-price row's leverage, and
whether each of its columns lies inside the range of the fitted rows.

Usage: to_price_leverage.py LAPTOPS.csv TO_PRICE.csv
"""
import csv
import json
import sys

import numpy as np

PLAN_COLUMNS = ["age_months", "battery_health_pct", "memory_gb", "storage_gb", "screen_in",
                "cpu_score", "grade", "warranty_months", "listing_weekday", "photo_count",
                "seller_note_length", "resale_price"]
NUMERIC = ["age_months", "battery_health_pct", "memory_gb", "storage_gb", "screen_in",
           "cpu_score", "warranty_months"]
MISSING = ("", "NA")


def design_row(row):
    age = float(row["age_months"])
    grade_a = 1.0 if row["grade"] == "A" else 0.0
    grade_b = 1.0 if row["grade"] == "B" else 0.0
    return [1.0, age, age * age, float(row["battery_health_pct"]), float(row["memory_gb"]),
            np.log(float(row["storage_gb"])), float(row["screen_in"]), float(row["cpu_score"]),
            grade_a, grade_b, age * grade_a, age * grade_b, float(row["warranty_months"])]


def main():
    with open(sys.argv[1], newline="") as data_file:
        used = [row for row in csv.DictReader(data_file)
                if all(row[column] not in MISSING for column in PLAN_COLUMNS)]
    x = np.array([design_row(row) for row in used])
    q, r = np.linalg.qr(x)
    fitted_leverage = (q ** 2).sum(axis=1)
    ranges = {c: (min(float(row[c]) for row in used), max(float(row[c]) for row in used))
              for c in NUMERIC}
    result = {"rows_used": len(used), "max_leverage": float(fitted_leverage.max()), "rows": {}}
    with open(sys.argv[2], newline="") as rows_file:
        for row in csv.DictReader(rows_file):
            entry = {"leverage": None, "in_range": None}
            # Rows that cannot be priced (a missing cell, an unknown grade, log of 0) get None.
            priceable = (all(row[c] not in MISSING for c in NUMERIC)
                         and row["grade"] in ("A", "B", "C") and float(row["storage_gb"]) > 0)
            if priceable:
                z = np.linalg.solve(r.T, np.array(design_row(row)))
                entry["leverage"] = float(z @ z)
                entry["in_range"] = all(ranges[c][0] <= float(row[c]) <= ranges[c][1]
                                        for c in NUMERIC)
            result["rows"][row["listing_id"]] = entry
    print(json.dumps(result))


if __name__ == "__main__":
    main()
