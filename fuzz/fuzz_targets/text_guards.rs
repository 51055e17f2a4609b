//! The guards on text from files, on arbitrary text: what reaches a terminal carries no
//! control or invisible character, an XML document keeps only characters XML allows, an
//! id that passes has nothing hidden, and a torn tail is cut at a line end.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::text::{
    count_line_ends, id_problem, is_hidden_or_control, terminal_escape, torn_tail, xml_chars_only,
    xml_escape,
};

fuzz_target!(|data: &[u8]| {
    if let Some((keep, line)) = torn_tail(data) {
        assert!(keep < data.len());
        assert!(matches!(data[keep - 1], b'\n' | b'\r'));
        assert_eq!(line, count_line_ends(&data[..keep]) + 1);
    }
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let shown = terminal_escape(text, false);
    assert!(!shown.chars().any(is_hidden_or_control));
    let shown = terminal_escape(text, true);
    assert!(!shown.chars().any(|c| is_hidden_or_control(c) && c != '\n'));
    let allowed = |c: char| {
        !((c as u32) < 0x20 && !matches!(c, '\t' | '\n' | '\r'))
            && c != '\u{fffe}'
            && c != '\u{ffff}'
    };
    assert!(xml_chars_only(text.to_string()).chars().all(allowed));
    let escaped = xml_escape(text);
    assert!(escaped.chars().all(allowed) && !escaped.contains('<'));
    if id_problem(text).is_none() {
        assert!(!text.chars().any(is_hidden_or_control));
        assert_eq!(text.trim(), text);
    }
});
