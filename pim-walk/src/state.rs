//! What the walk page asks for: saving a reading, taking the last one back and putting
//! it back, the running fix and the map. A save answers small (its line and the log's
//! row count and version); the fix (`/state`) and the map (`/map`) are worked out once
//! per version of the log, whatever the number of phones asking, and kept until the log
//! changes; a map with the walker's position on it is drawn for that request alone.
//!
//! Readings are named by their number in the log and their time (`#7 09:52`, UTC) on
//! the map, in the table and in the undo's question, the log's line kept beside.

use std::hash::{Hash, Hasher};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, OnceLock};

use pim_core::emitter::Emitter;
use pim_core::error::ErrorClass;
use pim_core::fix::Fix;
use pim_core::geo::GeoPoint;
use pim_core::geo::{distance_and_azimuth, LocalFrame};
use pim_core::ticket::{nearby, structures_in_reach, Structure};
use pim_core::walk::{rank_spots, walk_ring, Spot, MIN_SPOT_RANGE_M};
use pim_io::append::{last_row, read_locked, remove_last_row_if, restore_row, Removed};
use pim_io::fieldlog::{save_reading, FieldLog, North, ReadingText, MAX_ACCURACY_M};
use pim_io::text::{decimal_degrees, Axis};
use pim_report::map::{map_svg_at, name_observers, MapView, NextSpot, YouAreHere};
use pim_report::picture::PHONE;
use pim_report::readings::ReadingNames;
use pim_report::ticket::{fix_map_input, fix_radius_m};
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
    /// The rows taken back by this server, newest last, each with its exact bytes, for
    /// a redo. Held while the log is changed (a save, an undo, a redo), so the list
    /// and the log agree; a save empties it (the walk has moved on).
    undone: Mutex<Vec<Removed>>,
}

/// The fix of one version of the log, and its map when first asked for.
struct Worked {
    version: String,
    state: Value,
    fix: Option<Fix>,
    /// The readings' names, for the map.
    names: ReadingNames,
    /// The suggested next spot and its label.
    next: Option<(GeoPoint, String)>,
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
            undone: Mutex::new(Vec::new()),
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

/// The number of the reading on log line `line` (1 for the first reading), counted as
/// the log's readings are counted: lines neither blank nor a comment, less the header.
fn reading_number(walk: &Walk, line: u64) -> Option<usize> {
    let bytes = log_bytes(walk).ok()?;
    let mut end = 0usize;
    for _ in 0..line {
        end += bytes[end..].iter().position(|&b| b == b'\n')? + 1;
    }
    Some(rows(&bytes[..end]))
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
                names: ReadingNames::default(),
                next: None,
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
    let (state, fix, names, next) = work_out(walk, &bytes, &v);
    let w = Arc::new(Worked {
        version: v,
        state,
        fix,
        names,
        next,
        map: OnceLock::new(),
    });
    *cache = Some(w.clone());
    w
}

/// What [`work_out`] gives: the page's state, the fix, the readings' names and the
/// next spot with its label.
type WorkedOut = (Value, Option<Fix>, ReadingNames, Option<(GeoPoint, String)>);

/// Everything the page shows of one version of the log: the running fix, each
/// reading's residual and name, the last reading (what an undo would take) and the
/// suggested next spot with the cautions of the structures it is within reach of; or
/// why there is no fix yet.
fn work_out(walk: &Walk, bytes: &[u8], v: &str) -> WorkedOut {
    let rows = rows(bytes);
    let text = String::from_utf8_lossy(bytes);
    let log = read_log(&walk.log, &text);
    let names = log
        .as_ref()
        .map(|l| ReadingNames::new(l, None))
        .unwrap_or_default();
    let last = last_reading(bytes, log.as_ref(), &names);
    let newest = log.as_ref().and_then(|l| {
        l.rows
            .iter()
            .rev()
            .find_map(|r| r.position.map(|p| (p, names.name(r.line))))
    });
    let (fix, mut fix_json) = match (walk.fixer)(&walk.log, &text) {
        Ok(v) => v,
        Err(e) => {
            let why = if e.class == ErrorClass::Refused {
                e.message
            } else {
                e.to_string()
            };
            let state = json!({"rows": rows, "version": v, "no_fix": why, "last": last});
            return (state, None, names, None);
        }
    };
    if let Some(residuals) = fix_json["residuals"].as_array_mut() {
        for r in residuals {
            if let Some(line) = r["line"].as_u64() {
                r["name"] = json!(names.name(line));
            }
        }
    }
    let (next, spot) = next_spot(walk, &fix, newest);
    let mut state = json!({
        "rows": rows,
        "version": v,
        "fix": fix_json,
        "next": next,
        "last": last,
    });
    // the numbers as every JSON of the tool writes them
    pim_io::precision::round_json(&mut state);
    (state, Some(fix), names, spot)
}

/// The log read leniently (a torn last row left out), or `None` when it does not read.
fn read_log(path: &Path, text: &str) -> Option<FieldLog> {
    pim_io::fieldlog::read_field_log(&path.display().to_string(), text.as_bytes(), true).ok()
}

/// The last reading, as an undo would take it: its line and text (the undo names
/// both back), its number and time, bearing and note.
fn last_reading(bytes: &[u8], log: Option<&FieldLog>, names: &ReadingNames) -> Value {
    let Some(last) = last_row(bytes) else {
        return Value::Null;
    };
    let row = log.and_then(|l| l.rows.iter().find(|r| r.line == last.line));
    json!({
        "line": last.line,
        "row": last.row,
        "name": names.name(last.line),
        "bearing_deg": row.and_then(|r| r.bearing_deg),
        "north": row.map(|r| r.north),
        "level_dbm": row.and_then(|r| r.level_dbm),
        "note": row.and_then(|r| r.note.clone()),
    })
}

/// The page's state: the fix of the log as it stands (without the map), and the
/// reading a redo would put back.
pub fn state(walk: &Walk) -> Value {
    let mut v = worked(walk).state.clone();
    v["redo"] = redo_json(&walk.undone.lock().unwrap_or_else(|p| p.into_inner()));
    v
}

/// The reading a redo would put back: its line and text.
fn redo_json(undone: &[Removed]) -> Value {
    match undone.last() {
        Some(r) => json!({"line": r.line, "row": r.row}),
        None => Value::Null,
    }
}

/// The walker's position, as the page sends it with a map's or a walk's request.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Here {
    pub at: GeoPoint,
    /// The 95 % radius, metres, when given.
    pub accuracy_m: Option<f64>,
}

/// How far from the fix the walker's position may be for the map and the walk to the
/// next spot, metres: further, it is not this walk's (a typing error, another site).
pub const HERE_WITHIN_M: f64 = 20_000.0;

/// The walker's position from a query (`lat`, `lon`, `acc`): `Ok(None)` when it gives
/// none; refused when a value is not a number in range.
pub fn here_of(query: &str) -> Result<Option<Here>, String> {
    let mut lat = None;
    let mut lon = None;
    let mut acc = None;
    for (k, v) in form_urlencoded::parse(query.as_bytes()) {
        let number = || {
            v.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("`{k}` is not a number"))
        };
        match k.as_ref() {
            "lat" => lat = Some(number()?),
            "lon" => lon = Some(number()?),
            "acc" => acc = Some(number()?),
            _ => {}
        }
    }
    let (lat, lon) = match (lat, lon) {
        (Some(a), Some(o)) => (a, o),
        (None, None) => return Ok(None),
        _ => return Err("give both `lat` and `lon`".into()),
    };
    if !(-90.0..=90.0).contains(&lat) || !(-180.0..=180.0).contains(&lon) {
        return Err("the position is outside −90–90° latitude or −180–180° longitude".into());
    }
    if let Some(a) = acc {
        if !(0.0..=MAX_ACCURACY_M).contains(&a) {
            return Err(format!("the accuracy is outside 0–{MAX_ACCURACY_M:.0} m"));
        }
    }
    Ok(Some(Here {
        at: GeoPoint::new(lat, lon),
        accuracy_m: acc,
    }))
}

/// The map of the log as it stands (SVG) drawn for a phone, centred on the fix, the
/// readings named, the next spot marked and, when given, the walker's position; `None`
/// with no fix yet (or a position too far from the fix).
pub fn map(walk: &Walk, here: Option<Here>) -> Option<String> {
    let w = worked(walk);
    let fix = w.fix.as_ref()?;
    let draw = |here: Option<Here>| {
        let near = nearby(fix, &walk.structures, &walk.emitters, 30.0);
        let mut input = fix_map_input(
            fix,
            &walk.structures,
            &walk.emitters,
            &near,
            format!("Bearing walk: {}", file_name(&walk.log)),
        );
        name_observers(&mut input, fix, &w.names);
        let frame = LocalFrame::new(fix.position);
        input.view = MapView::AroundFix {
            half_width_m: (1.5 * fix_radius_m(fix)).max(40.0),
        };
        input.next_spot = w.next.as_ref().map(|(p, label)| {
            let (east_m, north_m) = frame.to_local(*p);
            NextSpot {
                east_m,
                north_m,
                label: label.clone(),
            }
        });
        input.you_are_here = here.map(|h| {
            let (east_m, north_m) = frame.to_local(h.at);
            YouAreHere {
                east_m,
                north_m,
                accuracy_m: h.accuracy_m,
            }
        });
        map_svg_at(&input, &PHONE)
    };
    match here {
        Some(h) if distance_and_azimuth(h.at, fix.position).0 > HERE_WITHIN_M => None,
        Some(h) => Some(draw(Some(h))),
        None => Some(w.map.get_or_init(|| draw(None)).clone()),
    }
}

/// The walk from the walker's position to the suggested next spot: its distance and
/// bearing (true), or `None` without a next spot (or a position too far off).
pub fn walk_to_next(walk: &Walk, here: Here) -> Option<Value> {
    let w = worked(walk);
    let (spot, _) = w.next.as_ref()?;
    let (d, az) = distance_and_azimuth(here.at, *spot);
    if d > HERE_WITHIN_M {
        return None;
    }
    let mut v = json!({"distance_m": d, "bearing_deg": az, "version": w.version});
    pim_io::precision::round_json(&mut v);
    Some(v)
}

/// Takes the last reading back when it is still the one the page named (`line` and
/// `row` of the form body: a second tap, or another phone's reading saved meanwhile,
/// takes nothing); its exact bytes are kept for a redo. The answer carries the small
/// state.
pub fn undo(walk: &Walk, body: &[u8]) -> (u16, Value) {
    let body = String::from_utf8_lossy(body);
    let expected = match (form_value(&body, "line"), raw_form_value(&body, "row")) {
        (Ok(Some(line)), Some(row)) => match line.parse::<u64>() {
            Ok(line) => (line, row),
            Err(_) => {
                return (
                    422,
                    json!({"error": {"message": "`line` is not a line number"}}),
                )
            }
        },
        _ => {
            return (
                422,
                json!({"error": {"message": "say which reading to take back (its line and row)"}}),
            )
        }
    };
    let mut undone = walk.undone.lock().unwrap_or_else(|p| p.into_inner());
    match remove_last_row_if(&walk.log, Some((expected.0, &expected.1))) {
        Ok(removed) => {
            let taken = json!({"line": removed.line, "row": removed.row});
            undone.push(removed);
            let redo = redo_json(&undone);
            drop(undone);
            (
                200,
                json!({"removed": taken, "redo": redo, "state": small_state(walk)}),
            )
        }
        Err(e) => (409, json!({"error": form_error_json(&e)})),
    }
}

/// Puts back the reading taken back last, byte for byte, when it is the one the page
/// names (`line` of the form body), so a second tap puts nothing back twice.
pub fn redo(walk: &Walk, body: &[u8]) -> (u16, Value) {
    let body = String::from_utf8_lossy(body);
    let line = form_value(&body, "line")
        .ok()
        .flatten()
        .and_then(|l| l.parse::<u64>().ok());
    let mut undone = walk.undone.lock().unwrap_or_else(|p| p.into_inner());
    let Some(last) = undone.last() else {
        return (
            409,
            json!({"error": {"message": "nothing to put back: no reading was taken back since the last save"}}),
        );
    };
    if line != Some(last.line) {
        return (
            409,
            json!({"error": {"message": format!("the reading to put back is the one from line {}; nothing was put back", last.line)}}),
        );
    }
    match restore_row(&walk.log, &last.bytes) {
        Ok(appended) => {
            let row = last.row.clone();
            undone.pop();
            let redo = redo_json(&undone);
            drop(undone);
            (
                200,
                json!({"restored": {"line": appended.line, "row": row}, "redo": redo,
                       "state": small_state(walk)}),
            )
        }
        Err(e) => (409, json!({"error": form_error_json(&e)})),
    }
}

/// A form field's value percent-decoded but not trimmed (a row's exact text).
fn raw_form_value(body: &str, name: &str) -> Option<String> {
    form_urlencoded::parse(body.as_bytes())
        .find(|(k, _)| k == name)
        .map(|(_, v)| v.into_owned())
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
        accuracy_m: get("accuracy_m")?,
        accuracy_where_logged: true,
    };
    let mut undone = walk.undone.lock().unwrap_or_else(|p| p.into_inner());
    Ok(
        match save_reading(&walk.log, &reading, &|column| column.to_string()) {
            Ok(appended) => {
                // the walk moved on: what was taken back stays out
                undone.clear();
                drop(undone);
                let number = reading_number(walk, appended.line);
                (
                    200,
                    json!({"saved": {"line": appended.line, "number": number,
                                     "created": appended.created},
                           "state": small_state(walk)}),
                )
            }
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

/// The next spot as `pim next` gives it (D-optimal among the candidates, or a ring at
/// the walk's median range), with the walk to it from the newest reading's spot (named
/// in `from`) and the structures it is within reach of; and the spot with its label
/// for the map.
fn next_spot(
    walk: &Walk,
    fix: &Fix,
    from: Option<(GeoPoint, String)>,
) -> (Value, Option<(GeoPoint, String)>) {
    let spots = match &walk.candidates {
        Some(c) => c.clone(),
        None => walk_ring(fix),
    };
    match rank_spots(fix, &spots, fix.sigma_deg_used, MIN_SPOT_RANGE_M) {
        Ok(ranked) => {
            let best = ranked.first();
            let mut v = page_next_json(best, from.as_ref().map(|f| f.0));
            if let Some(best) = best {
                if let (Some((_, name)), Some(w)) = (&from, v["walk"].as_object_mut()) {
                    w.insert("from".into(), json!(name));
                }
                v["cautions"] = json!(structures_in_reach(
                    best.spot.position,
                    &walk.structures,
                    &walk.emitters
                ));
            }
            let spot = best.map(|b| {
                (
                    b.spot.position,
                    b.spot.name.clone().unwrap_or_else(|| "next spot".into()),
                )
            });
            (v, spot)
        }
        Err(e) => (json!({"none": e.to_string()}), None),
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
