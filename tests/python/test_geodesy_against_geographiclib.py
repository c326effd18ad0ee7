"""Geographic coordinates against GeographicLib's own Python implementation of Karney's
geodesics (C. F. F. Karney, "Algorithms for geodesics", J. Geodesy 87, 43-55, 2013;
package `geographiclib` from PyPI, WGS 84, stated accuracy 15 nm).

* A geodesic distance term (`geodist:`) gives the distance in km that geographiclib gives:
  fitting y = geographiclib's distance on that term alone must give slope 1, intercept 0
  and a residual sum of squares at rounding level (any distance off by d adds d^2).
* The k nearest neighbours by geodesic distance: Moran's I of the residuals with
  row-standardised kNN weights, recomputed in numpy from neighbour sets found by brute
  force with geographiclib (ties to the earlier row), equals ours — across a town and
  across a state, where degrees and kilometres rank neighbours differently.
* Longitude and latitude used as planar coordinates are refused, naming the option.

The places are invented points (seeded), not real parcels.
"""
import json

import numpy as np
from geographiclib.geodesic import Geodesic

from conftest import run_raw, write_csv

WGS84 = Geodesic.WGS84


def km(lon1, lat1, lon2, lat2):
    return WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0


def places(seed, n, lon0, lat0, width, height):
    rng = np.random.default_rng(seed)
    return lon0 + width * rng.random(n), lat0 + height * rng.random(n), rng


def fit_json(path, *args):
    r = run_raw("fit", str(path), *args, "--format", "json")
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def test_geodesic_distance_term_equals_geographiclib(tmp_path):
    # A town (0.2 degrees) and a state (6 degrees wide), far north where degrees mislead most.
    for name, (lon0, lat0, w, h) in {"town": (-93.75, 42.0, 0.2, 0.15), "state": (-104.0, 41.0, 6.0, 4.0)}.items():
        lon, lat, _ = places(7, 300, lon0, lat0, w, h)
        place = (lon0 + w / 3, lat0 + h / 2)
        d = np.array([km(place[0], place[1], a, b) for a, b in zip(lon, lat)])
        path = tmp_path / f"{name}.csv"
        write_csv(path, {"Longitude": lon, "Latitude": lat, "d": d})
        doc = fit_json(path, "--target", "d", "--location-term",
                       f"geodist:Longitude:Latitude:{place[0]!r}:{place[1]!r}:Old Mill")
        b = {c["term"]: c["estimate"] for c in doc["coefficients"]}
        assert abs(b["km from Old Mill"] - 1.0) < 1e-12, (name, b)
        assert abs(b["intercept"]) < 1e-9, (name, b)
        # Distances agree to about a micrometre: RSS ~ n * d^2.
        assert doc["ss_residual"] < 300 * (1e-9) ** 2, (name, doc["ss_residual"])


def knn_moran(lon, lat, residuals, k):
    n = len(lon)
    weights = np.zeros((n, n))
    for i in range(n):
        distances = sorted((km(lon[i], lat[i], lon[j], lat[j]), j) for j in range(n) if j != i)
        for _, j in distances[:k]:
            weights[i, j] = 1.0 / k
    e = residuals
    return float(e @ weights @ e / (e @ e))


def test_geographic_nearest_neighbours_equal_a_brute_force_search(tmp_path):
    for name, (lon0, lat0, w, h) in {"town": (-93.75, 42.0, 0.2, 0.15), "state": (-104.0, 41.0, 6.0, 4.0)}.items():
        lon, lat, rng = places(11, 220, lon0, lat0, w, h)
        area = rng.normal(1800, 400, len(lon))
        # A price surface that rises to the north-east, so residuals cluster in space.
        price = 50 * area + 40_000 * (lon - lon0) / w + 30_000 * (lat - lat0) / h + rng.normal(0, 15_000, len(lon))
        path = tmp_path / f"{name}.csv"
        write_csv(path, {"price": price, "area": area, "Longitude": lon, "Latitude": lat})
        k = 6
        doc = fit_json(path, "--target", "price", "--terms", "area", "--spatial-check", "Longitude,Latitude",
                       "--coordinates", "geographic", "--neighbours", str(k))
        x = np.column_stack([np.ones(len(lon)), area])
        beta, *_ = np.linalg.lstsq(x, price, rcond=None)
        expected = knn_moran(lon, lat, price - x @ beta, k)
        got = doc["spatial"]["moran"]["statistic"]
        assert abs(got - expected) < 1e-10, (name, got, expected)
        # The same points read as planar degrees give other neighbours, hence another I
        # (renamed columns, so the refusal below does not apply).
        planar = tmp_path / f"{name}-planar.csv"
        write_csv(planar, {"price": price, "area": area, "e": lon, "n": lat})
        degrees = fit_json(planar, "--target", "price", "--terms", "area", "--spatial-check", "e,n",
                           "--neighbours", str(k))
        if name == "state":
            assert abs(degrees["spatial"]["moran"]["statistic"] - expected) > 1e-6, "degrees rank neighbours differently"


def test_longitude_and_latitude_used_as_planar_are_refused(tmp_path):
    lon, lat, rng = places(3, 50, -93.75, 42.0, 0.2, 0.15)
    path = tmp_path / "sales.csv"
    write_csv(path, {"price": rng.normal(2e5, 1e4, 50), "area": rng.normal(1800, 300, 50),
                     "Longitude": lon, "Latitude": lat})
    r = run_raw("fit", str(path), "--target", "price", "--terms", "area", "--spatial-check", "Longitude,Latitude")
    assert r.returncode != 0 and "--coordinates geographic" in r.stderr, r.stderr
    r = run_raw("fit", str(path), "--target", "price", "--terms", "area",
                "--location-term", "dist:Longitude:Latitude:-93.7:42.05:Old Mill")
    assert r.returncode != 0 and "geodist:Longitude:Latitude:PLON:PLAT:Old Mill" in r.stderr, r.stderr
