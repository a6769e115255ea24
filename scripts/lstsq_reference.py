#!/usr/bin/env python3
"""Makes tests/tests/data/lstsq_reference.json: an ill-conditioned least-squares case solved by numpy.linalg.lstsq.

The Rust test `tests/fit_vs_numpy.rs` solves the same matrix with logtrim-host's solver and compares.
Run from the repository root:  python3 scripts/lstsq_reference.py   (needs numpy)
"""
import json
import numpy as np

# A design like the fit's, made ill-conditioned on purpose: unscaled powers of temperature in °C over a
# narrow span (20…30 °C), times an ln-ratio column, plus a nearly collinear column.


def case(last_column):
    rows = []
    b = []
    for i in range(400):
        t = 20.0 + 10.0 * (i % 20) / 19.0
        x = -6.0 + 10.0 * (i // 20) / 19.0
        rows.append([1.0, t, t * t, t ** 3, x, x * t, x * t * t, last_column(t, x)])
        # A smooth target with a deterministic "noise" term.
        b.append(100.0 + 3.0 * t - 0.02 * t * t + 5600.0 * x + 1.5 * x * t + 0.37 * np.sin(7.3 * i))
    A = np.array(rows)
    y = np.array(b)
    sol, res, rank, sv = np.linalg.lstsq(A, y, rcond=None)
    fitted = A @ sol
    return {
        "a": rows,
        "b": b,
        "x": sol.tolist(),
        "fitted": fitted.tolist(),
        "sse": float(np.sum((y - fitted) ** 2)),
        "rank": int(rank),
        "condition": float(sv[0] / sv[-1]),
    }


out = {
    "source": "numpy.linalg.lstsq (numpy %s), rcond=None" % np.__version__,
    # Full rank but ill-conditioned: the last column is nearly x.
    "ill_conditioned": case(lambda t, x: x + 1e-7 * t ** 4),
    # Exactly rank-deficient: the last column is x + 1e-6 t^3, a combination of two others.
    "rank_deficient": case(lambda t, x: x + 1e-6 * t ** 3),
}
with open("tests/tests/data/lstsq_reference.json", "w") as f:
    json.dump(out, f, indent=1)
for k in ("ill_conditioned", "rank_deficient"):
    c = out[k]
    print(k, "rank", c["rank"], "condition %.3e" % c["condition"], "sse %.6e" % c["sse"])
