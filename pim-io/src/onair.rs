//! The on-air log (CSV `emitter,start,end`) and the listening log (CSV `time,heard`) of
//! the on-air evidence in [`pim_core::onair`]; both may carry a `note` column.
//!
//! Times are ISO 8601 dates and times: `2025-06-14T09:30:00Z`, `2025-06-14T09:30+02:00`,
//! `2025-06-14T09:30` (seconds and fractions optional; a space may stand for the `T`).
//! A time without a UTC offset is read on the same clock as the other times without one;
//! the two logs must then give every time without an offset, or every time with one, so
//! that no local time is compared with a UTC time. `heard` is `true` or `false` (`yes` and
//! `no` are understood).

use std::collections::HashMap;
use std::io::Read;

use time::OffsetDateTime;

use crate::text::parse_time;

use crate::table::{no_rows, Row, Table};
use pim_core::emitter::Emitter;
use pim_core::error::{Error, Place, Result};
use pim_core::onair::{Interval, Observation};

/// Columns of the on-air log.
pub const ON_AIR_COLUMNS: &[&str] = &["emitter", "start", "end", "note"];
/// Columns of the listening log.
pub const HEARD_COLUMNS: &[&str] = &["time", "heard", "note"];

/// Whether the times read so far carry a UTC offset, and where that was first seen, so
/// that both logs keep to one clock.
#[derive(Clone, Debug, Default)]
pub struct Clock {
    first: Option<(bool, Place)>,
}

impl Clock {
    fn check(&mut self, zoned: bool, place: Place, text: &str) -> Result<()> {
        match &self.first {
            None => {
                self.first = Some((zoned, place));
                Ok(())
            }
            Some((z, _)) if *z == zoned => Ok(()),
            Some((_, first)) => {
                let (this, that) = if zoned {
                    ("has a UTC offset", "has none")
                } else {
                    ("has no UTC offset", "has one")
                };
                let mut at = first.source.clone();
                if let Some(line) = first.line {
                    at.push_str(&format!(" line {line}"));
                }
                Err(Error::input(
                    place,
                    format!("`{text}` {this}, but the time on {at} {that}; give every time with an offset (such as Z or +02:00), or none"),
                ))
            }
        }
    }
}

fn time_field(row: &Row, field: &str, clock: &mut Clock) -> Result<OffsetDateTime> {
    let text = row
        .get(field)
        .ok_or_else(|| Error::input(row.place(field), format!("missing {field} time")))?;
    let (at, zoned) = parse_time(text).map_err(|m| Error::input(row.place(field), m))?;
    clock.check(zoned, row.place(field), text)?;
    Ok(at)
}

fn text_list(ids: &[&str]) -> String {
    const SHOWN: usize = 8;
    let mut s = ids
        .iter()
        .take(SHOWN)
        .copied()
        .collect::<Vec<_>>()
        .join(", ");
    if ids.len() > SHOWN {
        s.push_str(&format!(" and {} more", ids.len() - SHOWN));
    }
    s
}

/// Reads the on-air log: each row an interval in which emitter `emitter` (an id of
/// `emitters`) was on the air. Returns `(emitter index, interval)` pairs in file order.
pub fn read_on_air<R: Read>(
    source: &str,
    reader: R,
    emitters: &[Emitter],
    clock: &mut Clock,
) -> Result<Vec<(usize, Interval)>> {
    let mut table = Table::open(source, reader)?;
    table.require("emitter")?;
    table.require("start")?;
    table.require("end")?;
    let index: HashMap<&str, usize> = emitters
        .iter()
        .enumerate()
        .map(|(i, e)| (e.id.as_str(), i))
        .collect();
    let mut out = Vec::new();
    while let Some(row) = table.next_row()? {
        let id = row
            .get("emitter")
            .ok_or_else(|| Error::input(row.place("emitter"), "missing emitter id"))?;
        crate::emitters::checked_id(row.place("emitter"), id)?;
        let &e = index.get(id).ok_or_else(|| {
            let ids: Vec<&str> = emitters.iter().map(|e| e.id.as_str()).collect();
            Error::input(
                row.place("emitter"),
                format!(
                    "unknown emitter `{id}`; the emitter file has {}",
                    text_list(&ids)
                ),
            )
        })?;
        let start = time_field(&row, "start", clock)?;
        let end = time_field(&row, "end", clock)?;
        if end <= start {
            return Err(Error::input(
                row.place("end"),
                format!(
                    "end {} is not after start {}",
                    row.get("end").unwrap_or_default(),
                    row.get("start").unwrap_or_default()
                ),
            ));
        }
        out.push((e, Interval { start, end }));
    }
    if out.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(out)
}

/// Reads the listening log: the times someone listened and whether the interference was
/// heard. A time listed twice is refused, so that no time counts double.
pub fn read_heard<R: Read>(source: &str, reader: R, clock: &mut Clock) -> Result<Vec<Observation>> {
    let mut table = Table::open(source, reader)?;
    table.require("time")?;
    table.require("heard")?;
    let mut out = Vec::new();
    let mut seen: HashMap<OffsetDateTime, u64> = HashMap::new();
    while let Some(row) = table.next_row()? {
        let at = time_field(&row, "time", clock)?;
        if let Some(first) = seen.insert(at, row.line) {
            return Err(Error::input(
                row.place("time"),
                format!("the same time is already on line {first}"),
            ));
        }
        let heard_text = row
            .get("heard")
            .ok_or_else(|| Error::input(row.place("heard"), "missing heard (true or false)"))?;
        let heard = match heard_text.to_ascii_lowercase().as_str() {
            "true" | "yes" => true,
            "false" | "no" => false,
            _ => {
                return Err(Error::input(
                    row.place("heard"),
                    format!("`{heard_text}` is neither `true` nor `false`"),
                ))
            }
        };
        out.push(Observation { at, heard });
    }
    if out.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use pim_core::freq::Hz;
    use time::macros::datetime;

    #[test]
    fn times_with_and_without_offsets() {
        assert_eq!(
            parse_time("2025-06-14T09:30:00Z"),
            Ok((datetime!(2025-06-14 09:30 UTC), true))
        );
        assert_eq!(
            parse_time("2025-06-14T11:30+02:00"),
            Ok((datetime!(2025-06-14 09:30 UTC), true))
        );
        assert_eq!(
            parse_time("2025-06-14 09:30:15"),
            Ok((datetime!(2025-06-14 09:30:15 UTC), false))
        );
        assert_eq!(
            parse_time("2025-02-30T09:30Z"),
            Err(
                "`2025-02-30T09:30Z` is not a valid date and time: the day is out of range"
                    .to_string()
            )
        );
        assert_eq!(
            parse_time("half past nine"),
            Err(
                "`half past nine` is not an ISO 8601 date and time such as 2025-06-14T09:30:00Z"
                    .to_string()
            )
        );
    }

    fn tx() -> Vec<Emitter> {
        vec![
            Emitter::new("A", Hz(1), Hz(0)),
            Emitter::new("B", Hz(2), Hz(0)),
        ]
    }

    #[test]
    fn reads_both_logs() {
        let mut clock = Clock::default();
        let on = read_on_air(
            "on.csv",
            "emitter,start,end\nB,2025-06-14T09:00Z,2025-06-14T09:10Z\n".as_bytes(),
            &tx(),
            &mut clock,
        )
        .unwrap();
        assert_eq!(on[0].0, 1);
        let heard = read_heard(
            "heard.csv",
            "time,heard\n2025-06-14T09:05Z,TRUE\n2025-06-14T09:06Z,no\n".as_bytes(),
            &mut clock,
        )
        .unwrap();
        assert_eq!(heard.len(), 2);
        assert!(heard[0].heard && !heard[1].heard);
    }

    #[test]
    fn names_each_bad_value() {
        let on = |text: &str| {
            read_on_air("on.csv", text.as_bytes(), &tx(), &mut Clock::default())
                .unwrap_err()
                .to_string()
        };
        assert_eq!(
            on("emitter,start,end\nA,2025-06-14T09:00Z,2025-06-14T09:10Z\nZ,2025-06-14T09:00Z,2025-06-14T09:10Z\n"),
            "on.csv, line 3, field `emitter`: unknown emitter `Z`; the emitter file has A, B"
        );
        assert_eq!(
            on("emitter,start,end\nA,2025-06-14T09:10Z,2025-06-14T09:00Z\n"),
            "on.csv, line 2, field `end`: end 2025-06-14T09:00Z is not after start 2025-06-14T09:10Z"
        );
        assert_eq!(
            on("emitter,start,end\nA,2025-06-14T09:00Z,2025-06-14T09:10\n"),
            "on.csv, line 2, field `end`: `2025-06-14T09:10` has no UTC offset, but the time on on.csv line 2 has one; give every time with an offset (such as Z or +02:00), or none"
        );
        let heard = |text: &str| {
            read_heard("h.csv", text.as_bytes(), &mut Clock::default())
                .unwrap_err()
                .to_string()
        };
        assert_eq!(
            heard("time,heard\n2025-06-14T09:00Z,maybe\n"),
            "h.csv, line 2, field `heard`: `maybe` is neither `true` nor `false`"
        );
        assert_eq!(
            heard("time,heard\n2025-06-14T09:00Z,true\n2025-06-14T11:00+02:00,false\n"),
            "h.csv, line 3, field `time`: the same time is already on line 2"
        );
        assert_eq!(
            heard("time,heard\nnoon,true\n"),
            "h.csv, line 2, field `time`: `noon` is not an ISO 8601 date and time such as 2025-06-14T09:30:00Z"
        );
    }
}
