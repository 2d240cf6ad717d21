"""Write the demo CSV shipped in the package from the seeded generator.

Run: python scripts/make_demo_data.py
"""

from __future__ import annotations

from pathlib import Path

from forecastaudit.demo import DEMO_FILE, generate_demo_series

if __name__ == "__main__":
    target = Path(__file__).resolve().parents[1] / "forecastaudit" / "data" / DEMO_FILE
    series = generate_demo_series()
    series.to_frame().to_csv(target, index_label="month")
    print(f"wrote {len(series)} months to {target}")
