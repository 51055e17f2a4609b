//! What the walk page asks for: saving a reading, taking the last one back, the running
//! fix and the map. A save answers small (its line and the log's row count and
//! version); the fix (`/state`) and the map (`/map`) are worked out once per version of
//! the log, whatever the number of phones asking, and kept until the log changes.

use std::hash::{Hash, Hasher};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, OnceLock};

use pim_core::emitter::Emitter;
use pim_core::error::ErrorClass;
use pim_core::fix::Fix;
use pim_core::geo::GeoPoint;
use pim_core::ticket::{nearby, Structure};
use pim_core::walk::{rank_spots, walk_ring, Spot, MIN_SPOT_RANGE_M};
use pim_io::append::{read_locked, remove_last_row};
use pim_io::fieldlog::{save_reading, North, ReadingText};
use pim_io::text::{decimal_degrees, Axis};
use pim_report::map::map_svg;
use pim_report::ticket::fix_map_input;
use pim_report::walk::{form_error_json, page_next_json};
use serde_json::{json, Value};

use crate::Fixer;

/// What every request reads.
pub struct Walk {
    pub log: PathBuf,
    pub fixer: Box<Fixer>,
    pub structures: Vec<Structure>,
    pub emitters: Vec<Emitter>,
    pub candidates: Option<Vec<Spot>>,
    cache: Mutex<Option<Arc<Worked>>>,
}

/// The fix of one version of the log, and its map when first asked for.
struct Worked {
    version: String,
    state: Value,
    fix: Option<Fix>,
    map: OnceLock<String>,
}

impl Walk {
    pub fn new(
        log: PathBuf,
        fixer: Box<Fixer>,
        structures: Vec<Structure>,
        emitters: Vec<Emitter>,
        candidates: Option<Vec<Spot>>,
    ) -> Self {
        Walk {
            log,
            fixer,
            structures,
            emitters,
            candidates,
            cache: Mutex::new(None),
        }
    }
}

/// The log as it stands: its bytes (under the shared lock), or why there are none.
fn log_bytes(walk: &Walk) -> Result<Vec<u8>, Value> {
    match read_locked(&walk.log) {
        Ok(bytes) => Ok(bytes),
        Err(e) if e.class == ErrorClass::Io && std::fs::symlink_metadata(&walk.log).is_err() => {
            Err(json!({"rows": 0, "version": "none", "no_fix": "no reading yet"}))
        }
        Err(e) => Err(json!({"rows": 0, "version": "none", "no_fix": e.to_string()})),
    }
}

/// A version of the log's content (its length and a hash of its bytes).
fn version(bytes: &[u8]) -> String {
    let mut h = std::collections::hash_map::DefaultHasher::new();
    bytes.hash(&mut h);
    format!("{:x}-{:016x}", bytes.len(), h.finish())
}

/// The readings in a log: its lines that are neither blank nor a comment, less the
/// header.
fn rows(bytes: &[u8]) -> usize {
    bytes
        .split(|&b| b == b'\n' || b == b'\r')
        .filter(|l| {
            let t = l.trim_ascii();
            let t = t.strip_prefix(b"\xef\xbb\xbf").unwrap_or(t);
            !t.is_empty() && !t.starts_with(b"#")
        })
        .count()
        .saturating_sub(1)
}

/// The small state a save or an undo answers with: the row count and the version the
/// page fetches `/state` and `/map` for.
pub fn small_state(walk: &Walk) -> Value {
    match log_bytes(walk) {
        Ok(bytes) => json!({"rows": rows(&bytes), "version": version(&bytes)}),
        Err(v) => v,
    }
}

/// The fix of the log as it stands, worked out once per version.
fn worked(walk: &Walk) -> Arc<Worked> {
    let bytes = match log_bytes(walk) {
        Ok(b) => b,
        Err(state) => {
            return Arc::new(Worked {
                version: "none".into(),
                state,
                fix: None,
                map: OnceLock::new(),
            })
        }
    };
    let v = version(&bytes);
    // One worker works a version out; others asking for it meanwhile wait for it.
    let mut cache = walk.cache.lock().unwrap_or_else(|p| p.into_inner());
    if let Some(w) = cache.as_ref().filter(|w| w.version == v) {
        return w.clone();
    }
    let (state, fix) = work_out(walk, &bytes, &v);
    let w = Arc::new(Worked {
        version: v,
        state,
        fix,
        map: OnceLock::new(),
    });
    *cache = Some(w.clone());
    w
}

/// Everything the page shows of one version of the log: the running fix, each
/// reading's residual and the suggested next spot; or why there is no fix yet.
fn work_out(walk: &Walk, bytes: &[u8], v: &str) -> (Value, Option<Fix>) {
    let rows = rows(bytes);
    let text = String::from_utf8_lossy(bytes);
    let last_spot = last_position(&walk.log, &text);
    let (fix, fix_json) = match (walk.fixer)(&walk.log, &text) {
        Ok(v) => v,
        Err(e) => {
            let why = if e.class == ErrorClass::Refused {
                e.message
            } else {
                e.to_string()
            };
            return (json!({"rows": rows, "version": v, "no_fix": why}), None);
        }
    };
    let next = next_spot(walk, &fix, last_spot);
    let mut state = json!({
        "rows": rows,
        "version": v,
        "fix": fix_json,
        "next": next,
    });
    // the numbers as every JSON of the tool writes them
    pim_io::precision::round_json(&mut state);
    (state, Some(fix))
}

/// The page's state: the fix of the log as it stands (without the map).
pub fn state(walk: &Walk) -> Value {
    worked(walk).state.clone()
}

/// The map of the log as it stands (SVG), or `None` with no fix yet.
pub fn map(walk: &Walk) -> Option<String> {
    let w = worked(walk);
    let fix = w.fix.as_ref()?;
    Some(
        w.map
            .get_or_init(|| {
                let near = nearby(fix, &walk.structures, &walk.emitters, 30.0);
                map_svg(&fix_map_input(
                    fix,
                    &walk.structures,
                    &walk.emitters,
                    &near,
                    format!("Bearing walk: {}", file_name(&walk.log)),
                ))
            })
            .clone(),
    )
}

/// Takes the last reading back; the answer carries the small state.
pub fn undo(walk: &Walk) -> (u16, Value) {
    match remove_last_row(&walk.log) {
        Ok(removed) => (
            200,
            json!({"removed": {"line": removed.line, "row": removed.row},
                   "state": small_state(walk)}),
        ),
        Err(e) => (409, json!({"error": form_error_json(&e)})),
    }
}

/// One field of a form body (`a=1&b=2`), percent-decoded, trimmed, `None` when absent
/// or empty; text that is not UTF-8 is refused naming its field.
pub fn form_value(body: &str, name: &str) -> Result<Option<String>, Value> {
    for pair in body.split('&') {
        let (k, v) = pair.split_once('=').unwrap_or((pair, ""));
        let key = percent_encoding::percent_decode(k.replace('+', " ").as_bytes())
            .decode_utf8_lossy()
            .into_owned();
        if key != name {
            continue;
        }
        let plus = v.replace('+', " ");
        let value = percent_encoding::percent_decode(plus.as_bytes())
            .decode_utf8()
            .map_err(
                |_| json!({"error": {"field": name, "message": "not UTF-8 text; type it again"}}),
            )?;
        let value = value.trim();
        return Ok((!value.is_empty()).then(|| value.to_string()));
    }
    Ok(None)
}

/// Saves one reading from the page's form body; the answer carries the saved line and
/// the small state, or the error beside its field.
pub fn save(walk: &Walk, body: &[u8]) -> (u16, Value) {
    let Ok(body) = std::str::from_utf8(body) else {
        return (
            400,
            json!({"error": {"message": "the form is not UTF-8 text"}}),
        );
    };
    match save_form(walk, body) {
        Ok(v) => v,
        Err(v) => (422, v),
    }
}

fn save_form(walk: &Walk, body: &str) -> Result<(u16, Value), Value> {
    let get = |name: &str| form_value(body, name);
    let missing =
        |field: &str, message: &str| json!({"error": {"field": field, "message": message}});
    let Some(bearing_deg) = get("bearing_deg")? else {
        return Err(missing("bearing_deg", "missing bearing"));
    };
    let north = match get("north")?.as_deref() {
        None | Some("true") => North::True,
        Some("magnetic") => North::Magnetic,
        Some(_) => return Err(missing("north", "north is either `true` or `magnetic`")),
    };
    let reading = ReadingText {
        // Both empty: a row for `pim fix --track` to place by its time.
        lat: get("lat")?.map(|t| decimal_degrees(&t, Axis::Latitude)),
        lon: get("lon")?.map(|t| decimal_degrees(&t, Axis::Longitude)),
        bearing_deg,
        north,
        sigma_deg: get("sigma_deg")?,
        level_dbm: get("level_dbm")?,
        setup: None,
        note: get("note")?,
        time: get("time")?,
    };
    Ok(
        match save_reading(&walk.log, &reading, &|column| column.to_string()) {
            Ok(appended) => (
                200,
                json!({"saved": {"line": appended.line, "created": appended.created},
                       "state": small_state(walk)}),
            ),
            Err(e) => (
                if e.class == ErrorClass::Io { 500 } else { 422 },
                json!({"error": form_error_json(&e)}),
            ),
        },
    )
}

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
}

/// The position of the newest reading that has one.
fn last_position(path: &Path, text: &str) -> Option<GeoPoint> {
    let log = pim_io::fieldlog::read_field_log(&path.display().to_string(), text.as_bytes(), true)
        .ok()?;
    log.rows.iter().rev().find_map(|r| r.position)
}

/// The next spot as `pim next` gives it (D-optimal among the candidates, or a ring at
/// the walk's median range), with the walk to it from the newest reading's spot.
fn next_spot(walk: &Walk, fix: &Fix, from: Option<GeoPoint>) -> Value {
    let spots = match &walk.candidates {
        Some(c) => c.clone(),
        None => walk_ring(fix),
    };
    match rank_spots(fix, &spots, fix.sigma_deg_used, MIN_SPOT_RANGE_M) {
        Ok(ranked) => page_next_json(ranked.first(), from),
        Err(e) => json!({"none": e.to_string()}),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn form_values_are_decoded() {
        let body = "lat=51.5&note=gate+post%2C%20east&token=ab";
        assert_eq!(
            form_value(body, "note").unwrap().as_deref(),
            Some("gate post, east")
        );
        assert_eq!(form_value(body, "lat").unwrap().as_deref(), Some("51.5"));
        assert_eq!(form_value(body, "lon").unwrap(), None);
        assert_eq!(
            form_value("q=%e2%80%99", "q").unwrap().as_deref(),
            Some("\u{2019}")
        );
        // not UTF-8: refused naming the field, never replaced by U+FFFD
        let e = form_value("note=%ff%fe", "note").unwrap_err();
        assert_eq!(e["error"]["field"], "note");
    }

    #[test]
    fn comment_and_blank_lines_are_not_readings() {
        assert_eq!(
            rows(b"# walk\nlat,lon,bearing_deg\n\n1,2,3\n# x\n4,5,6\n"),
            2
        );
        assert_eq!(rows(b""), 0);
    }
}
