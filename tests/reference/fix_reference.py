#!/usr/bin/env python3
"""Reference fixes for the bearing estimator, computed independently of pim.

Azimuths are GeographicLib's (Karney 2013) geodesic azimuths on WGS84; the fix is
SciPy's `least_squares` on the wrapped bearing residuals divided by sigma; the
covariance is (J^T J)^-1 with J the Jacobian of those residuals with respect to east
and north metres at the fix (by central differences along geodesics); the 95 % ellipse
is scaled by chi-square(2) when sigma is given and by 2 F(2, n-2) with sigma estimated
from the residuals.

Run:  pip install scipy geographiclib && python3 fix_reference.py > fix_reference.json
"""
import json
import math

import numpy as np
from geographiclib.geodesic import Geodesic
from scipy.optimize import least_squares
from scipy.stats import chi2, f as fdist

G = Geodesic.WGS84


def wrap(d):
    return (d + 180.0) % 360.0 - 180.0


def azimuth(obs, lat, lon):
    return G.Inverse(obs[0], obs[1], lat, lon)["azi1"]


def residuals(p, observers, bearings, sigmas):
    lat, lon = p
    return np.array([
        math.radians(wrap(b - azimuth(o, lat, lon))) / s
        for o, b, s in zip(observers, bearings, sigmas)
    ])


def moved(lat, lon, east, north):
    p = G.Direct(lat, lon, 0.0, north)
    p = G.Direct(p["lat2"], p["lon2"], 90.0, east)
    return p["lat2"], p["lon2"]


def scenario(name, truth, spots, noise, sigma_deg, estimate_sigma):
    observers, bearings = [], []
    for (az, rng), e in zip(spots, noise):
        o = G.Direct(truth[0], truth[1], az, rng)
        obs = (o["lat2"], o["lon2"])
        observers.append(obs)
        bearings.append((azimuth(obs, *truth) + e) % 360.0)
    n = len(observers)
    sig = [math.radians(sigma_deg if not estimate_sigma else 1.0)] * n
    start = moved(truth[0], truth[1], 40.0, -30.0)
    sol = least_squares(residuals, start, args=(observers, bearings, sig),
                        xtol=1e-15, ftol=1e-15, gtol=1e-15, x_scale=[1e-4, 1e-4])
    lat, lon = sol.x
    h = 0.01
    jac = np.zeros((n, 2))
    for k, (de, dn) in enumerate([(h, 0.0), (0.0, h)]):
        plus = residuals(moved(lat, lon, de, dn), observers, bearings, sig)
        minus = residuals(moved(lat, lon, -de, -dn), observers, bearings, sig)
        jac[:, k] = (plus - minus) / (2 * h)
    cov = np.linalg.inv(jac.T @ jac)
    r = residuals((lat, lon), observers, bearings, sig)
    if estimate_sigma:
        s2 = float(r @ r) / (n - 2)
        cov = cov * s2
        k2 = 2.0 * fdist.ppf(0.95, 2, n - 2)
    else:
        k2 = chi2.ppf(0.95, 2)
    w, v = np.linalg.eigh(cov)
    major = v[:, 1]
    orientation = math.degrees(math.atan2(major[0], major[1])) % 180.0
    return {
        "name": name,
        "sigma_deg": None if estimate_sigma else sigma_deg,
        "observers": [{"lat": o[0], "lon": o[1], "bearing_deg": b}
                      for o, b in zip(observers, bearings)],
        "fix": {"lat": lat, "lon": lon},
        "semi_major_m": math.sqrt(k2 * w[1]),
        "semi_minor_m": math.sqrt(k2 * w[0]),
        "orientation_deg": orientation,
    }


def main():
    truth = (45.104620, -122.414033)
    out = [
        scenario("four spots around, sigma given", truth,
                 [(10, 250), (100, 180), (200, 320), (290, 150)],
                 [1.5, -2.0, 0.7, 2.5], 3.0, False),
        scenario("one side only, sigma given", truth,
                 [(150, 300), (170, 260), (190, 280), (210, 320), (230, 240)],
                 [-1.0, 2.0, -2.5, 1.0, 0.5], 2.0, False),
        scenario("eight spots, sigma estimated", truth,
                 [(165, 240), (120, 300), (80, 210), (35, 160),
                  (330, 190), (290, 260), (230, 220), (200, 120)],
                 [2.1, -3.4, 1.2, -0.8, 4.0, -2.6, 0.5, 3.0], None, True),
        scenario("long range, southern hemisphere", (-33.8650, 151.2094),
                 [(20, 2500), (95, 3200), (160, 1800)],
                 [0.8, -1.1, 0.4], 1.5, False),
    ]
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
