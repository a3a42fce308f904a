"""The sum-and-trend chart of series_report.html from a summary written by hand."""

from __future__ import annotations

import base64
import io

from peatburn.outputs.series_report import sum_trend_chart


def _q(phase, value, lo, hi, lo_i, hi_i, t=(10.0, 5.0, 15.0, -20.0, 40.0)):
    return {"phase": phase, "quantity": "co2e_t", "unit": "t CO2e",
            "sum": {"value": value, "lo": lo, "hi": hi, "lo_independent": lo_i, "hi_independent": hi_i},
            "trend": {"value": t[0], "lo": t[1], "hi": t[2], "lo_independent": t[3], "hi_independent": t[4]}}


def test_chart_is_a_png_with_both_panels():
    from PIL import Image

    summary = {"span": "2031-2033", "trend_years": "2031-2033",
               "quantities": [_q("smouldering", 100.0, 60.0, 150.0, 75.0, 130.0),
                              _q("flaming", 20.0, 18.0, 22.0, 19.0, 21.0),
                              _q("both", 120.0, 80.0, 170.0, 95.0, 150.0),
                              {**_q("smouldering", 1.0, 0.5, 2.0, 0.6, 1.8), "quantity": "carbon_t"}]}
    uri = sum_trend_chart(summary)
    assert uri.startswith("data:image/png;base64,")
    img = Image.open(io.BytesIO(base64.b64decode(uri.split(",", 1)[1])))
    assert img.width > 1.5 * img.height  # two panels side by side
    # without intervals (no draws) there is nothing to compare: no chart
    none = {**summary, "quantities": [_q("smouldering", 100.0, None, None, None, None)]}
    assert sum_trend_chart(none) is None
    assert sum_trend_chart({"span": "2031-2031", "trend_years": "2031-2031", "quantities": []}) is None

