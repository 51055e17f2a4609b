//! Readings named as the walker knows them: by their number in the log and the time they
//! were taken (`#7 14:32`), with the log's line kept beside where a reader may open the
//! file (`#7 14:32, line 9`).
//!
//! A reading's number is its row's place among the log's rows, counting from 1 (the
//! header is not a reading); its time is the row's `time`, shown as hours and minutes in
//! the site's offset when one is given, else in UTC.

use pim_core::time::{OffsetDateTime, UtcOffset};
use pim_io::fieldlog::FieldLog;

/// One reading's number and time, by its line in the log.
#[derive(Clone, Debug, PartialEq)]
struct Named {
    line: u64,
    number: usize,
    time: Option<OffsetDateTime>,
}

/// The names of a log's readings.
#[derive(Clone, Debug, PartialEq)]
pub struct ReadingNames {
    rows: Vec<Named>,
    offset: UtcOffset,
}

impl Default for ReadingNames {
    fn default() -> Self {
        ReadingNames {
            rows: Vec::new(),
            offset: UtcOffset::UTC,
        }
    }
}

impl ReadingNames {
    /// The names of `log`'s rows, times shown in `offset` (UTC when `None`).
    pub fn new(log: &FieldLog, offset: Option<UtcOffset>) -> Self {
        ReadingNames {
            rows: log
                .rows
                .iter()
                .enumerate()
                .map(|(i, r)| Named {
                    line: r.line,
                    number: i + 1,
                    time: r.time,
                })
                .collect(),
            offset: offset.unwrap_or(UtcOffset::UTC),
        }
    }

    /// Whether no reading is named (names made without a log).
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    fn find(&self, line: u64) -> Option<&Named> {
        self.rows.iter().find(|r| r.line == line)
    }

    /// The reading's number, counting from 1, when the line is one of the log's rows.
    pub fn number(&self, line: u64) -> Option<usize> {
        self.find(line).map(|r| r.number)
    }

    /// The reading's time as RFC 3339 in the shown offset, when it has one.
    pub fn time_rfc3339(&self, line: u64) -> Option<String> {
        let t = self.find(line)?.time?.to_offset(self.offset);
        Some(pim_io::text::time_text(t))
    }

    /// `#7 14:32`; `#7` without a time; `line 9` when the line is not a row of the log
    /// (names made without the log).
    pub fn name(&self, line: u64) -> String {
        match self.find(line) {
            Some(r) => match r.time {
                Some(t) => {
                    let t = t.to_offset(self.offset);
                    format!("#{} {:02}:{:02}", r.number, t.hour(), t.minute())
                }
                None => format!("#{}", r.number),
            },
            None => format!("line {line}"),
        }
    }

    /// The name with the log's line beside: `#7 14:32, line 9` (`line 9` alone when
    /// the line is not a row of the log).
    pub fn name_and_line(&self, line: u64) -> String {
        match self.find(line) {
            Some(_) => format!("{}, line {line}", self.name(line)),
            None => format!("line {line}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use pim_io::fieldlog::LogRow;

    fn row(line: u64, time: Option<&str>) -> LogRow {
        LogRow {
            line,
            position: None,
            bearing_deg: Some(10.0),
            north: pim_io::fieldlog::North::True,
            time: time.map(|t| pim_io::fieldlog::parse_time(t).expect("a time")),
            sigma_deg: None,
            accuracy_m: None,
            level_dbm: None,
            setup: None,
            note: None,
        }
    }

    #[test]
    fn readings_are_named_by_number_and_time() {
        let log = FieldLog {
            source: "walk.csv".into(),
            rows: vec![
                row(2, Some("2026-11-28T09:12:40Z")),
                row(4, None),
                row(5, Some("2026-11-28T23:59:59Z")),
            ],
            ..FieldLog::default()
        };
        let utc = ReadingNames::new(&log, None);
        assert_eq!(utc.name(2), "#1 09:12");
        assert_eq!(utc.name(4), "#2");
        assert_eq!(utc.name_and_line(5), "#3 23:59, line 5");
        assert_eq!(utc.name(9), "line 9");
        assert_eq!(utc.number(5), Some(3));
        assert_eq!(utc.time_rfc3339(2).as_deref(), Some("2026-11-28T09:12:40Z"));
        assert_eq!(utc.time_rfc3339(4), None);
        // In the site's own offset: the clock the walker read.
        let site = UtcOffset::from_hms(1, 0, 0).expect("an offset");
        let local = ReadingNames::new(&log, Some(site));
        assert_eq!(local.name(2), "#1 10:12");
        assert_eq!(local.name(5), "#3 00:59");
        assert_eq!(
            local.time_rfc3339(2).as_deref(),
            Some("2026-11-28T10:12:40+01:00")
        );
        assert_eq!(ReadingNames::default().name(3), "line 3");
    }
}
