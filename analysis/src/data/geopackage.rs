//! GeoPackage geometry to places: each row's point, or the centroid of its
//! polygon, as two coordinate columns.
//!
//! A GeoPackage geometry value is a small header followed by standard
//! well-known binary (OGC GeoPackage Encoding Standard 12-128r18, §2.1.3
//! "GeoPackageBinary"): the magic `GP`, a version byte, a flags byte (bit 0
//! the header's byte order, bits 1–3 the envelope's size, bit 4 an empty
//! geometry, bit 5 an extended type), the spatial reference system id
//! (`int32`), the envelope, then the WKB. The WKB is read by the `wkb` crate
//! and centroids come from `geo` (area-weighted for polygons, length-weighted
//! for lines). The reference system is looked up in `gpkg_spatial_ref_sys`;
//! ids 0 and −1 are the standard's "undefined geographic" and "undefined
//! Cartesian" systems.

use crate::error::{Error, Result};
use geo::Centroid;
use geo_traits::to_geo::ToGeoGeometry;

/// One decoded geometry value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Place {
    /// First coordinate (longitude for a geographic system).
    pub x: f64,
    /// Second coordinate (latitude for a geographic system).
    pub y: f64,
    /// What the place is: a point, or which shape's centroid.
    pub kind: &'static str,
}

/// Whether a binary value is a GeoPackage geometry (starts with `GP`).
pub(crate) fn is_geometry(blob: &[u8]) -> bool {
    blob.len() >= 8 && &blob[..2] == b"GP"
}

/// The spatial reference system id and the place of a GeoPackage geometry
/// (`None` for an empty geometry). The error says what is wrong with the value.
pub(crate) fn decode(blob: &[u8]) -> std::result::Result<(i32, Option<Place>), String> {
    if !is_geometry(blob) {
        return Err("it does not start with the GeoPackage magic `GP`".into());
    }
    let flags = blob[3];
    if flags & 0b10_0000 != 0 {
        return Err("it is an extended GeoPackage geometry type, which is not read".into());
    }
    let envelope = match (flags >> 1) & 0b111 {
        0 => 0,
        1 => 32,
        2 | 3 => 48,
        4 => 64,
        other => return Err(format!("its envelope indicator {other} is not one the standard defines")),
    };
    let id_bytes = [blob[4], blob[5], blob[6], blob[7]];
    let srs_id = if flags & 1 == 1 { i32::from_le_bytes(id_bytes) } else { i32::from_be_bytes(id_bytes) };
    if flags & 0b1_0000 != 0 {
        return Ok((srs_id, None));
    }
    let wkb = blob.get(8 + envelope..).ok_or("it ends inside its envelope")?;
    let geometry: geo::Geometry<f64> =
        wkb::reader::read_wkb(wkb).map_err(|e| format!("its well-known binary is malformed: {e}"))?.to_geometry();
    let kind = match &geometry {
        geo::Geometry::Point(_) => "point",
        geo::Geometry::MultiPoint(_) => "multipoint centroid",
        geo::Geometry::Polygon(_) => "polygon centroid",
        geo::Geometry::MultiPolygon(_) => "multipolygon centroid",
        geo::Geometry::LineString(_) | geo::Geometry::MultiLineString(_) | geo::Geometry::Line(_) => "line centroid",
        _ => "shape centroid",
    };
    // An empty shape (or a point of NaN coordinates, WKB's empty point) has no place.
    let place = geometry.centroid().filter(|c| c.x().is_finite() && c.y().is_finite()).map(|c| Place {
        x: c.x(),
        y: c.y(),
        kind,
    });
    Ok((srs_id, place))
}

/// The reference system `srs_id` of the file in words, and whether its
/// coordinates are degrees of longitude and latitude.
pub(crate) fn reference_system(connection: &rusqlite::Connection, srs_id: i32) -> Result<(String, bool)> {
    match srs_id {
        0 => return Ok(("undefined geographic (GeoPackage srs_id 0): longitude, latitude in degrees".into(), true)),
        -1 => return Ok(("undefined Cartesian (GeoPackage srs_id -1)".into(), false)),
        _ => {}
    }
    let row = connection.query_row(
        "SELECT srs_name, organization, organization_coordsys_id, definition FROM gpkg_spatial_ref_sys WHERE srs_id = ?1",
        [srs_id],
        |row| {
            Ok((
                row.get::<_, Option<String>>(0)?,
                row.get::<_, Option<String>>(1)?,
                row.get::<_, Option<i64>>(2)?,
                row.get::<_, Option<String>>(3)?,
            ))
        },
    );
    match row {
        Ok((name, organization, code, definition)) => {
            let definition = definition.unwrap_or_default();
            let trimmed = definition.trim_start().to_ascii_uppercase();
            let degrees =
                trimmed.starts_with("GEOGCS") || trimmed.starts_with("GEOGCRS") || trimmed.starts_with("GEODCRS");
            let authority = match (organization, code) {
                (Some(o), Some(c)) => format!("{}:{c} ", o.to_ascii_uppercase()),
                _ => String::new(),
            };
            let kind = if degrees { "geographic: longitude, latitude in degrees" } else { "projected" };
            Ok((format!("{authority}{} ({kind})", name.unwrap_or_else(|| format!("srs_id {srs_id}"))), degrees))
        }
        Err(rusqlite::Error::QueryReturnedNoRows) => Err(Error::Specification(format!(
            "a geometry names spatial reference system {srs_id}, which the GeoPackage's gpkg_spatial_ref_sys \
             does not define; the file is not a valid GeoPackage"
        ))),
        Err(cause) => Err(Error::Specification(format!(
            "cannot read the GeoPackage's spatial reference systems (gpkg_spatial_ref_sys): {cause}"
        ))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A GeoPackage point written byte by byte from the standard's layout:
    /// little-endian header, no envelope, srs_id 4326, WKB point (1, x, y).
    #[test]
    fn a_point_decodes_with_its_reference_system() {
        let mut blob = vec![b'G', b'P', 0, 0b0000_0001];
        blob.extend(4326i32.to_le_bytes());
        blob.extend([1u8, 1, 0, 0, 0]);
        blob.extend((-93.62f64).to_le_bytes());
        blob.extend(42.03f64.to_le_bytes());
        let (srs, place) = decode(&blob).expect("decodes");
        assert_eq!(srs, 4326);
        assert_eq!(place, Some(Place { x: -93.62, y: 42.03, kind: "point" }));
        let mut empty = blob[..8].to_vec();
        empty[3] |= 0b1_0000;
        assert_eq!(decode(&empty).expect("empty").1, None);
        assert!(decode(b"not a geometry").is_err());
    }
}
