//! The precision every number the tool writes for people and programs is given: one
//! rule, by the unit a field's name ends in, used by every JSON, GeoJSON, KML and CSV
//! writer (hand-written: serde has no per-field rounding, and a rule by unit keeps the
//! writers from choosing their own).
//!
//! | a name ending in | is written to | why |
//! |---|---|---|
//! | `lat`, `lon`, `lat_deg`, `lon_deg`, `coordinates`, `region` | 1e-7° | about 1 cm on the ground, below any GPS |
//! | any other `_deg` (bearings, orientations, residuals, σ) | 0.1° | a hand-held bearing is good to a few degrees |
//! | `_db`, `_dbm`, `_dbc`, `_dbi`, `_dbuv_m` | 0.01 dB | below any analyser's resolution |
//! | `_mhz` | 1e-6 MHz | the hertz: frequencies are whole hertz |
//! | `_khz` | 1e-3 kHz | the hertz |
//! | `_m`, `_m2` | 0.01 m (m²) | a centimetre, below any position's error |
//! | `_w`, `_v_m` | 4 significant figures | a level to 0.01 dB |
//! | `_s` | 1 ms | |
//! | `weight` (a reading's robust weight) | 0.001 | |
//! | `fraction` | 1e-6 | a share to a millionth |
//!
//! Other numbers (counts, confidence) are written as computed. A value that
//! rounds to zero is written `0`, never `-0`.

use serde::Serialize;
use serde_json::Value;

/// How a number is rounded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rounding {
    /// To this many decimals.
    Decimals(u32),
    /// To this many significant figures.
    Significant(u32),
}

/// Decimals of a coordinate in degrees (1e-7°, about 1 cm).
pub const COORDINATE_DECIMALS: u32 = 7;
/// Decimals of a bearing or other angle in degrees.
pub const ANGLE_DECIMALS: u32 = 1;
/// Decimals of a level or gain in dB.
pub const LEVEL_DECIMALS: u32 = 2;

/// The rounding of a number written under `key` (module docs), `None` when it is written
/// as computed.
///
/// ```
/// use pim_io::precision::{rounding_for, Rounding};
/// assert_eq!(rounding_for("lat_deg"), Some(Rounding::Decimals(7)));
/// assert_eq!(rounding_for("bearing_deg"), Some(Rounding::Decimals(1)));
/// assert_eq!(rounding_for("path_db"), Some(Rounding::Decimals(2)));
/// assert_eq!(rounding_for("rank"), None);
/// ```
pub fn rounding_for(key: &str) -> Option<Rounding> {
    let k = key.to_ascii_lowercase();
    let ends = |s: &str| k.ends_with(s);
    if matches!(
        k.as_str(),
        "lat" | "lon" | "coordinates" | "region" | "bbox"
    ) || ends("_lat")
        || ends("_lon")
        || ends("lat_deg")
        || ends("lon_deg")
    {
        Some(Rounding::Decimals(COORDINATE_DECIMALS))
    } else if ends("_deg") || k.contains("_deg_") {
        Some(Rounding::Decimals(ANGLE_DECIMALS))
    } else if ends("_db") || ends("_dbm") || ends("_dbc") || ends("_dbi") || ends("_dbuv_m") {
        Some(Rounding::Decimals(LEVEL_DECIMALS))
    } else if ends("_mhz") {
        Some(Rounding::Decimals(6))
    } else if ends("_khz") {
        Some(Rounding::Decimals(3))
    } else if ends("_w") || ends("_v_m") {
        Some(Rounding::Significant(4))
    } else if ends("_m") || ends("_m2") || k.contains("_m_") {
        Some(Rounding::Decimals(2))
    } else if ends("_s") || k == "weight" {
        Some(Rounding::Decimals(3))
    } else if ends("fraction") {
        Some(Rounding::Decimals(6))
    } else {
        None
    }
}

/// `x` rounded as `r` says, never `-0`; a value that is not finite is left alone.
///
/// ```
/// use pim_io::precision::{round, Rounding};
/// assert_eq!(round(60.00000000000003, Rounding::Significant(4)), 60.0);
/// assert_eq!(round(261.2336009979248, Rounding::Decimals(1)), 261.2);
/// assert!(round(-0.004, Rounding::Decimals(2)).is_sign_positive());
/// ```
pub fn round(x: f64, r: Rounding) -> f64 {
    if !x.is_finite() || x == 0.0 {
        return if x == 0.0 { 0.0 } else { x };
    }
    let decimals = match r {
        Rounding::Decimals(d) => d as i32,
        Rounding::Significant(s) => s as i32 - 1 - x.abs().log10().floor() as i32,
    };
    let scale = 10f64.powi(decimals);
    let y = (x * scale).round() / scale;
    // dividing by the scale can leave a tail (0.1 + noise): the shortest text of the
    // rounded value read back gives the nearest double to it
    let y: f64 = format!("{y:.prec$}", prec = decimals.max(0) as usize)
        .parse()
        .unwrap_or(y);
    if y == 0.0 {
        0.0
    } else {
        y
    }
}

/// `x` as text with `decimals` decimals, never `-0.00`.
///
/// ```
/// use pim_io::precision::fixed;
/// assert_eq!(fixed(-0.001, 2), "0.00");
/// assert_eq!(fixed(-6.02, 1), "-6.0");
/// ```
pub fn fixed(x: f64, decimals: usize) -> String {
    let text = format!("{x:.decimals$}");
    if text.starts_with('-') && text[1..].chars().all(|c| c == '0' || c == '.') {
        text[1..].to_string()
    } else {
        text
    }
}

/// `x` as text with a sign always shown (`+6.0`, `-3.5`), never `-0.0` or `+-0.0`.
pub fn signed(x: f64, decimals: usize) -> String {
    let text = fixed(x, decimals);
    if text.starts_with('-') {
        text
    } else {
        format!("+{text}")
    }
}

/// `x` as a CSV or KML cell under the column `key`, rounded as [`rounding_for`] says.
pub fn cell(key: &str, x: f64) -> String {
    match rounding_for(key) {
        Some(Rounding::Decimals(d)) => fixed(x, d as usize),
        Some(r) => round(x, r).to_string(),
        None => x.to_string(),
    }
}

/// Rounds every number of a JSON tree by the key it sits under (an array's numbers by
/// the array's key), and turns `-0` into `0`.
pub fn round_json(v: &mut Value) {
    round_under(v, None);
}

fn round_under(v: &mut Value, rule: Option<Rounding>) {
    match v {
        Value::Number(n) => {
            if let (Some(x), false) = (n.as_f64(), n.is_i64() || n.is_u64()) {
                let y = match rule {
                    Some(r) => round(x, r),
                    None if x == 0.0 => 0.0,
                    None => x,
                };
                if let Some(m) = serde_json::Number::from_f64(y) {
                    *n = m;
                }
            }
        }
        Value::Array(items) => {
            for item in items {
                round_under(item, rule);
            }
        }
        Value::Object(map) => {
            // an object's numbers keep to their own keys
            for (k, item) in map.iter_mut() {
                round_under(item, rounding_for(k));
            }
        }
        _ => {}
    }
}

/// `value` as a JSON tree with every number rounded ([`round_json`]).
pub fn rounded_json<T: Serialize + ?Sized>(value: &T) -> serde_json::Result<Value> {
    let mut v = serde_json::to_value(value)?;
    round_json(&mut v);
    Ok(v)
}

/// Writes `value` as JSON with every number rounded; `pretty` indents it.
pub fn write_json<T: Serialize + ?Sized>(
    out: &mut dyn std::io::Write,
    value: &T,
    pretty: bool,
) -> std::io::Result<()> {
    let v = rounded_json(value).map_err(std::io::Error::from)?;
    if pretty {
        serde_json::to_writer_pretty(&mut *out, &v)
    } else {
        serde_json::to_writer(&mut *out, &v)
    }
    .map_err(std::io::Error::from)
}

/// `value` as JSON text with every number rounded; `pretty` indents it.
pub fn json_text<T: Serialize + ?Sized>(value: &T, pretty: bool) -> serde_json::Result<String> {
    let v = rounded_json(value)?;
    if pretty {
        serde_json::to_string_pretty(&v)
    } else {
        serde_json::to_string(&v)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn numbers_are_rounded_by_their_unit() {
        let mut v = json!({
            "lat_deg": 45.123456789,
            "observer": {"lon_deg": -122.000000049},
            "coordinates": [[-122.12345678, 45.98765432]],
            "bearing_deg": 261.2336009979248,
            "erp_w": 60.00000000000003,
            "path_db": -0.001,
            "freq_mhz": 155.610_002 + 1e-9,
            "offset_khz": 12.5000000001,
            "rank": 3,
            "confidence": 0.30000000000000004,
            "items": [{"level_dbm": -90.1234}],
        });
        round_json(&mut v);
        assert_eq!(v["lat_deg"], json!(45.1234568));
        assert_eq!(v["observer"]["lon_deg"], json!(-122.0));
        assert_eq!(v["coordinates"][0][0], json!(-122.1234568));
        assert_eq!(v["bearing_deg"], json!(261.2));
        assert_eq!(v["erp_w"], json!(60.0));
        assert_eq!(v["path_db"].to_string(), "0.0");
        assert_eq!(v["freq_mhz"], json!(155.610002));
        assert_eq!(v["offset_khz"], json!(12.5));
        assert_eq!(v["rank"], json!(3));
        assert_eq!(v["confidence"], json!(0.30000000000000004));
        assert_eq!(v["items"][0]["level_dbm"], json!(-90.12));
    }

    #[test]
    fn cells_never_read_minus_zero() {
        assert_eq!(cell("path_db", -0.001), "0.00");
        assert_eq!(signed(-0.01, 1), "+0.0");
        assert_eq!(cell("lat_deg", 45.0), "45.0000000");
    }
}
