#!/usr/bin/env python3
"""The laptop reseller's pricing, end to end from Python (invented data: examples/README.md).

    PYTHONPATH=build/python python3 examples/python/price_laptops.py [OUT_DIR]

1. reads this month's listings into a pandas DataFrame and selects the price model (stepwise by
   BIC, the plan of examples/plans/stepwise_bic.json written as a dict), with progress;
2. prints the route, the coefficients, the criteria and the cautions, and writes the audit and
   the reviewer's report (OUT_DIR, default build/python-example);
3. verifies the audit against the frame (fingerprint of the frame's canonical form and a replay);
4. prices the listings waiting for a price, read into a frame (predictions, intervals and flags);
5. reruns the recorded plan on next month's listings (a frame) and says what changed, the old
   model's error on the new listings included.
"""

import pathlib
import sys

import pandas

import stepledger

HERE = pathlib.Path(__file__).resolve().parent
DATA = HERE.parent / "data"
OUT = pathlib.Path(sys.argv[1] if len(sys.argv) > 1 else "build/python-example")

PLAN = {
    "response": "resale_price",
    "intercept": True,
    "terms": [
        {"name": "age", "column": "age_months"},
        {"name": "age^2", "power": {"column": "age_months", "degree": 2}},
        {"name": "battery", "column": "battery_health_pct"},
        {"name": "memory", "column": "memory_gb"},
        {"name": "log_storage", "log": "storage_gb"},
        {"name": "screen", "column": "screen_in"},
        {"name": "cpu", "column": "cpu_score"},
        {"name": "grade", "categorical": "grade", "baseline": "C"},
        {"name": "age:grade", "product": ["age", "grade"]},
        {"name": "warranty", "column": "warranty_months"},
        {"name": "weekday", "categorical": "listing_weekday", "baseline": "Mon"},
        {"name": "photos", "column": "photo_count"},
        {"name": "note_length", "column": "seller_note_length"},
    ],
    "method": "stepwise",
    "criterion": "bic",
}


def progress(phase, done, total):
    if phase == "reading" and done == total:
        print(f"  read {done:,} rows from the frame")


def main():
    listings = pandas.read_csv(DATA / "laptops.csv", float_precision="round_trip")
    print(f"1. Selecting the price model on {len(listings):,} listings")
    result = stepledger.select(listings, PLAN, out=OUT / "month1", force=True, progress=progress)

    print("\n2. Route")
    print(result.route[["index", "action", "term", "criterion_value"]].to_string(index=False))
    print("\nCoefficients")
    print(result.coefficients[["name", "estimate", "se", "p", "ci_low", "ci_high"]].to_string(index=False))
    criteria = result.criteria
    print(f"\nn = {criteria['n']}, adjusted R2 = {criteria['adj_r2']:.4f}, BIC = {criteria['bic']:.2f}, "
          f"sigma = {criteria['sigma']:.2f}")
    print("Cautions:")
    for caution in result.cautions:
        print(f"  - {caution['message']}")
    print(f"Wrote {OUT / 'month1' / 'audit.json'} and {OUT / 'month1' / 'report.html'}")

    print("\n3. Verifying the audit against the frame")
    check = stepledger.verify(OUT / "month1" / "audit.json", data=listings)
    print(f"  {'holds' if check.holds else 'DIFFERS'}: fingerprint {result.fingerprint[:16]}... "
          f"(the frame's canonical form), replay {check.checks['checks']['replay']}")

    print("\n4. Pricing the listings waiting for a price")
    waiting = pandas.read_csv(DATA / "laptops_to_price.csv", float_precision="round_trip")
    prices = stepledger.predict(OUT / "month1" / "audit.json", waiting, id="listing_id")
    for _, row in prices.iterrows():
        if row["prediction"] is None or row["prediction"] != row["prediction"]:
            print(f"  {row['id']}: not priced ({row['detail']})")
        else:
            flags = f"  [{', '.join(row['flags'])}]" if row["flags"] else ""
            print(f"  {row['id']}: {row['prediction']:8.2f}  (95% for one listing: "
                  f"{row['pi_low']:.2f} to {row['pi_high']:.2f}){flags}")

    print("\n5. Next month: the recorded plan on the new listings")
    next_month = pandas.read_csv(DATA / "laptops_month2.csv", float_precision="round_trip")
    month2 = stepledger.rerun(OUT / "month1" / "audit.json", next_month, out=OUT / "month2", force=True)
    print(month2.comparison_text())
    return 0 if check.holds else 1


if __name__ == "__main__":
    sys.exit(main())
