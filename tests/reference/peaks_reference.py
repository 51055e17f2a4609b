#!/usr/bin/env python3
"""Reference peaks for `pim sweep`, from SciPy's general-purpose peak finder.

Regenerate with:
    pip install scipy
    python3 tests/reference/peaks_reference.py > tests/reference/peaks_reference.json

The trace: 4,000 points of 2.5 kHz from 150 MHz over a floor sloping from -112 to
-104 dBm, with the noise an analyser shows in one sweep with a sample detector (power
exponentially distributed: the Rayleigh envelope), and twelve planted carriers of
known frequency and level. Levels are written to 0.001 dB, and both implementations
read those same numbers.

- `peaks`: scipy.signal.find_peaks(levels, height=floor + 10 dB, distance=5) with the
  planted floor line, compared index for index with pim's peak selection;
- `peaks_5db`: the same with height = floor + 5 dB; `maxima`: find_peaks(levels) with
  no height and no distance (every local maximum);
- `running_median`: scipy.ndimage.median_filter(levels, size=101, mode="nearest") at
  every 10th point, which pim's windowed-median floor must follow.
"""
import json

import numpy as np
from scipy.ndimage import median_filter
from scipy.signal import find_peaks

N = 4000
START_HZ = 150_000_000
STEP_HZ = 2_500.0
THRESHOLD_DB = 10.0
DISTANCE = 5
WINDOW = 101

rng = np.random.default_rng(20261201)
i = np.arange(N)
floor = -112.0 + 8.0 * i / (N - 1)
# Noise of one sweep, sample detector: 10·log10 of an exponential power with its median
# on the floor line.
noise_db = 10.0 * np.log10(rng.exponential(1.0, N) / np.log(2.0))
levels = floor + noise_db

planted = []
for k in range(12):
    centre = 150 + k * 320 + rng.uniform(-0.5, 0.5)
    height = 15.0 + 3.0 * k
    x = (i - centre) * STEP_HZ / 3_000.0
    bump = floor + height - 12.0 * x * x
    levels = np.maximum(levels, bump)
    planted.append({
        "freq_hz": START_HZ + centre * STEP_HZ,
        "level_dbm": float(np.interp(centre, i, floor) + height),
    })

levels = np.round(levels, 3)
peaks, _ = find_peaks(levels, height=floor + THRESHOLD_DB, distance=DISTANCE)
peaks_5db, _ = find_peaks(levels, height=floor + 5.0, distance=DISTANCE)
maxima, _ = find_peaks(levels)
running = median_filter(levels, size=WINDOW, mode="nearest")
every = 10

print(json.dumps({
    "source": "scipy.signal.find_peaks and scipy.ndimage.median_filter, SciPy "
              + __import__("scipy").__version__,
    "start_hz": START_HZ,
    "step_hz": STEP_HZ,
    "floor_start_dbm": -112.0,
    "floor_stop_dbm": -104.0,
    "threshold_db": THRESHOLD_DB,
    "distance": DISTANCE,
    "window": WINDOW,
    "planted": planted,
    "levels_dbm": [float(v) for v in levels],
    "peaks": [int(p) for p in peaks],
    "peaks_5db": [int(p) for p in peaks_5db],
    "maxima": [int(p) for p in maxima],
    "running_median_every": every,
    "running_median_dbm": [round(float(v), 3) for v in running[::every]],
}, separators=(",", ":")))
