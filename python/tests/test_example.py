"""examples/python/price_laptops.py runs end to end (the laptop scenario from Python)."""

import os
import subprocess
import sys

from conftest import EXAMPLES


def month2_prediction_available(folder):
    import json
    audit = json.loads((folder / "month2" / "audit.json").read_text())
    return audit["comparison"]["prediction"]["available"] is True


def test_price_laptops_example(tmp_path):
    completed = subprocess.run([sys.executable, str(EXAMPLES / "python" / "price_laptops.py"), str(tmp_path)],
                               capture_output=True, text=True, env=dict(os.environ), timeout=300)
    assert completed.returncode == 0, completed.stderr
    out = completed.stdout
    assert "holds: fingerprint" in out and "replay holds" in out
    assert "TP-001:" in out and "outside-range" in out
    assert "not priced (missing: battery_health_pct is missing" in out  # TP-008's NA, a NaN in the frame
    assert month2_prediction_available(tmp_path)
    assert (tmp_path / "month1" / "audit.json").exists() and (tmp_path / "month2" / "report.html").exists()
