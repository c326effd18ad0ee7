"""GeoPackage layers written by an outside writer — Python's own sqlite3 and struct, following
the OGC GeoPackage Encoding Standard 12-128r18 (§2.1.3 GeoPackageBinary header, §1.1.2
gpkg_spatial_ref_sys, §2.1.5 gpkg_geometry_columns) and OGC Simple Features well-known binary —
give the places expected: a point its coordinates; a polygon its area-weighted centroid, computed
here by the shoelace formula (e.g. Bourke, "Calculating the area and centroid of a polygon", 1988).

The places are compared through the command line: regressing a column holding the expected
coordinate on the read coordinate must give slope 1, intercept 0 and no residual.
The parcels are invented.
"""
import json
import sqlite3
import struct

import numpy as np

from conftest import run_raw

WGS84_WKT = ('GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563]],'
             'PRIMEM["Greenwich",0],UNIT["degree",0.0174532925199433]]')
UTM_WKT = 'PROJCS["WGS 84 / UTM zone 15N",GEOGCS["WGS 84"],PROJECTION["Transverse_Mercator"]]'


def gpkg_header(srs_id, envelope=None):
    flags = 0b0000_0001  # little-endian header
    body = b""
    if envelope is not None:
        flags |= 0b0000_0010  # envelope [minx, maxx, miny, maxy]
        body = struct.pack("<4d", *envelope)
    return b"GP" + bytes([0, flags]) + struct.pack("<i", srs_id) + body


def wkb_point(x, y, big_endian=False):
    return struct.pack(">bIdd" if big_endian else "<bIdd", 0 if big_endian else 1, 1, x, y)


def wkb_polygon(ring):
    return struct.pack("<bII", 1, 3, 1) + struct.pack("<I", len(ring)) + b"".join(struct.pack("<dd", *p) for p in ring)


def shoelace_centroid(ring):
    # About the first vertex, so that large projected coordinates do not cancel in the cross products.
    x0, y0 = ring[0]
    x, y = (np.array(ring[:-1]) - (x0, y0)).T
    x1, y1 = np.roll(x, -1), np.roll(y, -1)
    cross = x * y1 - x1 * y
    area = cross.sum() / 2
    return x0 + ((x + x1) * cross).sum() / (6 * area), y0 + ((y + y1) * cross).sum() / (6 * area)


def write_layer(path, srs_id, srs_name, definition, rows):
    db = sqlite3.connect(path)
    db.executescript("""
        CREATE TABLE gpkg_spatial_ref_sys (srs_name TEXT NOT NULL, srs_id INTEGER PRIMARY KEY,
            organization TEXT NOT NULL, organization_coordsys_id INTEGER NOT NULL,
            definition TEXT NOT NULL, description TEXT);
        CREATE TABLE gpkg_contents (table_name TEXT PRIMARY KEY, data_type TEXT, identifier TEXT,
            description TEXT, last_change TEXT, min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE,
            srs_id INTEGER);
        CREATE TABLE gpkg_geometry_columns (table_name TEXT, column_name TEXT, geometry_type_name TEXT,
            srs_id INTEGER, z TINYINT, m TINYINT);
        CREATE TABLE parcels (fid INTEGER PRIMARY KEY, price REAL, expected_x REAL, expected_y REAL, geom BLOB);
    """)
    db.execute("INSERT INTO gpkg_spatial_ref_sys VALUES (?, ?, 'EPSG', ?, ?, NULL)",
               (srs_name, srs_id, srs_id, definition))
    db.execute("INSERT INTO gpkg_contents (table_name, data_type, srs_id) VALUES ('parcels', 'features', ?)",
               (srs_id,))
    db.execute("INSERT INTO gpkg_geometry_columns VALUES ('parcels', 'geom', 'GEOMETRY', ?, 0, 0)", (srs_id,))
    db.executemany("INSERT INTO parcels (price, expected_x, expected_y, geom) VALUES (?, ?, ?, ?)", rows)
    db.commit()
    db.close()


def layer_rows(rng, n, x0, y0, size):
    rows = []
    for i in range(n):
        if i % 2 == 0:  # a point, some written big-endian, some with an envelope
            x, y = x0 + size * rng.random(), y0 + size * rng.random()
            envelope = (x, x, y, y) if i % 4 == 0 else None
            blob = gpkg_header(SRS, envelope) + wkb_point(x, y, big_endian=(i % 3 == 0))
        else:  # an irregular quadrilateral lot
            cx, cy = x0 + size * rng.random(), y0 + size * rng.random()
            d = size / 200
            ring = [(cx, cy), (cx + 2 * d, cy + 0.3 * d), (cx + 1.7 * d, cy + 1.6 * d), (cx - 0.2 * d, cy + d),
                    (cx, cy)]
            x, y = shoelace_centroid(ring)
            blob = gpkg_header(SRS) + wkb_polygon(ring)
        rows.append((2e5 + 1e4 * rng.random(), x, y, blob))
    return rows


SRS = 4326


def check_places(path, x_name, y_name):
    for axis, column in (("x", x_name), ("y", y_name)):
        r = run_raw("fit", str(path), "--table", "parcels", "--target", f"expected_{axis}", "--terms", column,
                    "--format", "json")
        assert r.returncode == 0, r.stderr
        doc = json.loads(r.stdout)
        b = {c["term"]: c["estimate"] for c in doc["coefficients"]}
        assert abs(b[column] - 1) < 1e-9 and abs(b["intercept"]) < 1e-9 * max(1, abs(doc["coefficients"][0]["estimate"])), b
        assert doc["ss_residual"] < 1e-18 * len(b) * 1e6, doc["ss_residual"]
    return doc["data"]["source"]["geometry"][0]


def test_points_and_polygon_centroids_in_degrees(tmp_path):
    global SRS
    SRS = 4326
    rng = np.random.default_rng(5)
    path = tmp_path / "parcels.gpkg"
    write_layer(path, 4326, "WGS 84 geodetic", WGS84_WKT, layer_rows(rng, 60, -93.75, 42.0, 0.2))
    stamp = check_places(path, "geom_lon", "geom_lat")
    assert stamp["degrees"] is True and "EPSG:4326" in stamp["srs"] and "geographic" in stamp["srs"]
    assert stamp["place"] == "point, polygon centroid"
    # Degrees are refused as planar places, and read as geographic ones.
    r = run_raw("fit", str(path), "--table", "parcels", "--target", "price", "--terms", "expected_x",
                "--spatial-check", "geom_lon,geom_lat")
    assert r.returncode != 0 and "--coordinates geographic" in r.stderr, r.stderr
    r = run_raw("fit", str(path), "--table", "parcels", "--target", "price", "--terms", "expected_x",
                "--spatial-check", "geom_lon,geom_lat", "--coordinates", "geographic", "--format", "json")
    assert r.returncode == 0, r.stderr


def test_a_projected_layer_names_its_projection(tmp_path):
    global SRS
    SRS = 32615
    rng = np.random.default_rng(6)
    path = tmp_path / "projected.gpkg"
    write_layer(path, 32615, "WGS 84 / UTM zone 15N", UTM_WKT, layer_rows(rng, 40, 448_000.0, 4_650_000.0, 5_000.0))
    stamp = check_places(path, "geom_x", "geom_y")
    assert stamp["degrees"] is False and "EPSG:32615 WGS 84 / UTM zone 15N (projected)" == stamp["srs"], stamp
