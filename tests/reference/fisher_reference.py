"""Reference values for the recording's agreement check: Fisher's exact test (two-sided)
and the phi coefficient on 2 x 2 tables of presences, computed by SciPy.

Each table is [[a, b], [c, d]]: a = sweeps with the product present and all its emitters
on, b = emitters on and product absent, c = product present with an emitter off, d =
neither. Regenerate with:

    pip install scipy
    python3 tests/reference/fisher_reference.py > tests/reference/fisher_reference.json
"""
import json
import math

from scipy.stats import fisher_exact

TABLES = [
    (3, 1, 1, 3),
    (10, 0, 0, 10),
    (0, 5, 5, 0),
    (12, 3, 2, 40),
    (60, 8, 0, 132),
    (45, 20, 38, 97),
    (1, 0, 0, 0),
    (0, 0, 7, 9),
    (5, 5, 5, 5),
    (150, 12, 9, 829),
    (2, 7, 8, 2),
    (30, 70, 20, 80),
]


def phi(a, b, c, d):
    den = math.sqrt((a + b) * (c + d) * (a + c) * (b + d))
    return 0.0 if den == 0 else (a * d - b * c) / den


out = []
for a, b, c, d in TABLES:
    _, p = fisher_exact([[a, b], [c, d]], alternative="two-sided")
    out.append({"table": [a, b, c, d], "fisher_p": float(p), "phi": phi(a, b, c, d)})
print(json.dumps({"source": "scipy.stats.fisher_exact (two-sided)", "cases": out}, indent=1))
