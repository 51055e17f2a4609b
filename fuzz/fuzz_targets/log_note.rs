//! What is written is what the reader accepts: a note that passes the shared check
//! (`pim_io::text::free_text_problem`) goes into a field-log row in any delimiter and
//! line end and reads back unchanged (less surrounding blanks); one that fails names
//! no character of the text; and a coordinate with both a sign and a hemisphere letter
//! is never accepted.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::fieldlog::{read_field_log, LOG_HEADER};
use pim_io::text::{
    csv_record, free_text_bytes_problem, free_text_problem, parse_coordinate, Axis, MAX_NOTE_BYTES,
};

fuzz_target!(|data: &[u8]| {
    let Some((&mode, note)) = data.split_first() else {
        return;
    };
    match free_text_bytes_problem(note, MAX_NOTE_BYTES) {
        Some(why) => {
            assert!(why.len() < 200);
            if let Ok(text) = std::str::from_utf8(note) {
                assert_eq!(free_text_problem(text, MAX_NOTE_BYTES), Some(why));
            }
        }
        None => {
            let text = std::str::from_utf8(note).expect("a note that passes is UTF-8");
            let delimiter = [b',', b';', b'\t'][usize::from(mode % 3)];
            let crlf = mode & 4 != 0;
            let header: Vec<&str> = LOG_HEADER.split(',').collect();
            let row = [
                "2026-11-28T10:40:00Z",
                "45.1025",
                "-122.4132",
                "347.1",
                "true",
                "",
                "",
                text,
            ];
            let mut log = csv_record(&header, delimiter, crlf);
            log.push_str(&csv_record(row, delimiter, crlf));
            let read = read_field_log("fuzz.csv", log.as_bytes(), false)
                .expect("a row with a note that passes the check reads back");
            assert_eq!(read.rows.len(), 1);
            let want = text.trim_matches(|c: char| c == ' ' || c == '\t');
            assert_eq!(read.rows[0].note.as_deref().unwrap_or(""), want);
        }
    }
    if let Ok(text) = std::str::from_utf8(note) {
        for axis in [Axis::Latitude, Axis::Longitude] {
            let letters: &[char] = match axis {
                Axis::Latitude => &['N', 'S', 'n', 's'],
                Axis::Longitude => &['E', 'W', 'e', 'w'],
            };
            let t = text.trim();
            let lettered = t.starts_with(letters) || t.ends_with(letters);
            if lettered && t.contains(['-', '+', '−']) {
                assert!(parse_coordinate(text, axis).is_err(), "{text:?}");
            }
        }
    }
});
