//! The catalogue of bad inputs: one file per kind under `tests/bad-inputs/` (encodings,
//! delimiters and decimal commas, truncation, binary data, NaN and infinities, values out
//! of range, duplicate ids and times, ragged rows, empty files, geometry that fixes
//! nothing) and the exact message and exit code each must give. Exit codes as in the
//! README: 3 a bad input file, 5 valid inputs that support no answer. Each command runs
//! inside `tests/bad-inputs/`; `{F}` stands for the `field-logs/` directory.

use crate::support::{pim_in, workspace_root};

/// (arguments, exit code, the whole of standard error)
const CATALOGUE: &[(&[&str], i32, &str)] = &[
    (&["plan", "--channels", "channels-duplicate-freq.csv"], 3, "pim: channels-duplicate-freq.csv, line 4, field `freq_mhz`: 452.025 MHz is already listed on line 3"),
    (&["plan", "--channels", "channels-header-only.csv"], 3, "pim: channels-header-only.csv: no data rows after the header"),
    (&["plan", "--channels", "channels-negative-bw.csv"], 3, "pim: channels-negative-bw.csv, line 2, field `bw_khz`: bandwidth -11.25 kHz is negative"),
    (&["plan", "--channels", "channels-no-freq-column.csv"], 3, "pim: channels-no-freq-column.csv, line 1, field `freq_mhz`: missing column; the header has: id, mhz"),
    (&["plan", "--channels", "channels-text-freq.csv"], 3, "pim: channels-text-freq.csv, line 3, field `freq_mhz`: `four-fifty-two` is not a number"),
    (&["explain", "146.34", "--emitters", "emitters-absurd-freq.csv"], 3, "pim: emitters-absurd-freq.csv, line 3, field `freq_mhz`: frequency 400000 MHz is above 300 GHz; is the unit MHz?"),
    (&["explain", "146.34", "--emitters", "emitters-binary.csv"], 3, "pim: emitters-binary.csv, line 1: column 1 of the header is not UTF-8 text"),
    (&["explain", "146.34", "--emitters", "emitters-decimal-comma.csv"], 3, "pim: emitters-decimal-comma.csv, line 2, field `freq_mhz`: `146,94` is not a number (a decimal comma? write the number with a point)"),
    (&["explain", "146.34", "--emitters", "emitters-duplicate-id.csv"], 3, "pim: emitters-duplicate-id.csv, line 4, field `id`: duplicate id `RPT` (first used on line 2)"),
    (&["explain", "146.34", "--emitters", "emitters-duplicate-id.json"], 3, "pim: emitters-duplicate-id.json, line 2, field `id`: duplicate id `A` (first used on line 1)"),
    (&["explain", "146.34", "--emitters", "emitters-empty.csv"], 3, "pim: emitters-empty.csv: empty file: expected a header line naming the columns"),
    (&["explain", "146.34", "--emitters", "emitters-header-only.csv"], 3, "pim: emitters-header-only.csv: no data rows after the header"),
    (&["explain", "146.34", "--emitters", "emitters-inf-bw.csv"], 3, "pim: emitters-inf-bw.csv, line 2, field `bw_khz`: `inf` is not a finite number"),
    (&["explain", "146.34", "--emitters", "emitters-lat-out-of-range.csv"], 3, "pim: emitters-lat-out-of-range.csv, line 3, field `lat`: latitude 95.0 is outside −90…90"),
    (&["explain", "146.34", "--emitters", "emitters-latin1.csv"], 3, "pim: emitters-latin1.csv, line 2, field `owner`: not UTF-8 text; save the file as UTF-8"),
    (&["explain", "146.34", "--emitters", "emitters-lon-out-of-range.csv"], 3, "pim: emitters-lon-out-of-range.csv, line 2, field `lon`: longitude -190 is outside −180…180"),
    (&["explain", "146.34", "--emitters", "emitters-nan-freq.csv"], 3, "pim: emitters-nan-freq.csv, line 2, field `freq_mhz`: `NaN` is not a finite number"),
    (&["explain", "146.34", "--emitters", "emitters-negative-bw.csv"], 3, "pim: emitters-negative-bw.csv, line 2, field `bw_khz`: bandwidth -16 kHz is negative"),
    (&["explain", "146.34", "--emitters", "emitters-comma-split-number.csv"], 3, "pim: emitters-comma-split-number.csv, line 2: 5 fields, but the header has 4 columns (a decimal comma? write numbers with a point, or separate the columns with `;`)"),
    (&["explain", "146.34", "--emitters", "emitters-negative-freq.csv"], 3, "pim: emitters-negative-freq.csv, line 2, field `freq_mhz`: frequency -146.94 MHz must be above zero"),
    (&["explain", "146.34", "--emitters", "emitters-negative-power.csv"], 3, "pim: emitters-negative-power.csv, line 2, field `erp_w`: power -50 W must be above zero"),
    (&["explain", "146.34", "--emitters", "emitters-no-freq-column.csv"], 3, "pim: emitters-no-freq-column.csv, line 1, field `freq_mhz`: missing column; the header has: id, channel, bw_khz (name the column with --columns freq=COLUMN)"),
    (&["explain", "146.34", "--emitters", "emitters-ambiguous-freq.csv"], 3, "pim: emitters-ambiguous-freq.csv, line 1: columns `Frequency (MHz)` and `Tx Freq` could both be the frequency; say which with --columns 'freq=Frequency (MHz)'"),
    (&["explain", "146.34", "--emitters", "emitters-bad-designator.csv"], 3, "pim: emitters-bad-designator.csv, line 3, field `Emission designator`: `18OKF8E` is not an emission designator (the bandwidth needs three digits and one of H, K, M or G in its first four characters); expected the necessary bandwidth and the class, such as 16K0F3E or 11K2F3E (ITU Radio Regulations, Appendix 1)"),
    (&["explain", "146.34", "--emitters", "emitters-missing-columns.csv"], 3, "pim: emitters-missing-columns.csv, line 1: missing columns `id`, `freq_mhz`; the header has: Site, Power (W), Remarks (name them with --columns id=COLUMN,freq=COLUMN)"),
    (&["explain", "146.34", "--emitters", "emitters-no-bandwidth.csv"], 3, "pim: emitters-no-bandwidth.csv, line 2, field `bw_khz`: no bandwidth: give the bandwidth (0 for a plain carrier), an emission designator such as 16K0F3E, or a kind with a default (fm, am, repeater, land mobile, paging, dmr, p25, nxdn, tetra, carrier)"),
    (&["explain", "146.34", "--emitters", "emitters-erp-no-unit.csv"], 3, "pim: emitters-erp-no-unit.csv, line 2, field `ERP`: `250` has no unit and the column names none; write `250 W` or `250 dBW`, name the unit in the header (`ERP (W)`) or map the column with --columns erp_w=ERP"),
    (&["explain", "146.34", "--emitters", "emitters-comma-in-note.csv"], 3, "pim: emitters-comma-in-note.csv, line 3: 5 fields, but the header has 4 columns (a comma inside a text such as a note? put that text in double quotes: \"a, b\")"),
    (&["explain", "146.34", "--emitters", "emitters-ragged.csv"], 3, "pim: emitters-ragged.csv, line 3: 2 fields, but the header has 3 columns"),
    (&["explain", "146.34", "--emitters", "emitters-text-freq.csv"], 3, "pim: emitters-text-freq.csv, line 3, field `freq_mhz`: `one-fifty` is not a number"),
    (&["explain", "146.34", "--emitters", "emitters-truncated-row.csv"], 3, "pim: emitters-truncated-row.csv, line 3: 2 fields, but the header has 4 columns"),
    (&["explain", "146.34", "--emitters", "emitters-truncated.json"], 3, "pim: emitters-truncated.json, line 2: not a JSON array of emitter objects: EOF while parsing a value at line 2 column 22"),
    (&["explain", "146.34", "--emitters", "emitters-utf16.csv"], 3, "pim: emitters-utf16.csv, line 1: UTF-16 text; save the file as UTF-8 (CSV UTF-8 in a spreadsheet)"),
    (&["explain", "146.34", "--emitters", "emitters-zero-freq.csv"], 3, "pim: emitters-zero-freq.csv, line 2, field `freq_mhz`: frequency 0 MHz must be above zero"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "{F}/on-air.csv", "--heard", "heard-duplicate-time.csv"], 3, "pim: heard-duplicate-time.csv, line 4, field `time`: the same time is already on line 2"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "{F}/on-air.csv", "--heard", "heard-header-only.csv"], 3, "pim: heard-header-only.csv: no data rows after the header"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "{F}/on-air.csv", "--heard", "heard-no-offset.csv"], 3, "pim: heard-no-offset.csv, line 2, field `time`: `2025-06-14T08:12` has no UTC offset, but the time on {F}/on-air.csv line 2 has one; give every time with an offset (such as Z or +02:00), or none"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "{F}/on-air.csv", "--heard", "heard-not-boolean.csv"], 3, "pim: heard-not-boolean.csv, line 3, field `heard`: `faint` is neither `true` nor `false`"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-bad-time.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-bad-time.csv, line 2, field `start`: `after breakfast` is not an ISO 8601 date and time such as 2025-06-14T09:30:00Z"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-end-before-start.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-end-before-start.csv, line 3, field `end`: end 2025-06-14T09:00-07:00 is not after start 2025-06-14T09:05-07:00"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-impossible-date.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-impossible-date.csv, line 2, field `start`: `2025-02-30T08:00-07:00` is not a valid date and time: the day is out of range"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-mixed-offsets.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-mixed-offsets.csv, line 3, field `start`: `2025-06-14T09:00` has no UTC offset, but the time on on-air-mixed-offsets.csv line 2 has one; give every time with an offset (such as Z or +02:00), or none"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-no-end-column.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-no-end-column.csv, line 1, field `end`: missing column; the header has: emitter, start, stop"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-unknown-emitter.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-unknown-emitter.csv, line 3, field `emitter`: unknown emitter `SKP-153`; the emitter file has QK7MHR-R, SKP-152, SKP-157, FIRE-DSP, HWY-BASE, UTIL-UHF, QFMR, QAMV and 1 more"),
    (&["plan", "--grid", "150,12.5,12", "--protect", "protect-ragged.csv"], 3, "pim: protect-ragged.csv, line 2: 4 fields, but the header has 3 columns (a comma inside a text such as a note? put that text in double quotes: \"a, b\")"),
    (&["plan", "--grid", "150,12.5,12", "--protect", "protect-zero-freq.csv"], 3, "pim: protect-zero-freq.csv, line 2, field `freq_mhz`: frequency 0 MHz must be above zero"),
    (&["slope", "--readings", "readings-absurd-level.csv", "--kind", "attenuator"], 3, "pim: readings-absurd-level.csv, line 3, field `level_dbm`: level -990 dBm is outside -200…+100 dBm"),
    (&["slope", "--readings", "readings-header-only.csv", "--kind", "attenuator"], 3, "pim: readings-header-only.csv: no data rows after the header"),
    (&["slope", "--readings", "readings-nan-step.csv", "--kind", "attenuator"], 3, "pim: readings-nan-step.csv, line 3, field `step_db`: `NaN` is not a finite number"),
    (&["slope", "--readings", "readings-negative-attenuation.csv", "--kind", "attenuator"], 3, "pim: readings-negative-attenuation.csv, line 3, field `step_db`: attenuation -3 dB is negative; give the attenuation inserted (0 for none)"),
    (&["slope", "--readings", "readings-no-level-column.csv", "--kind", "attenuator"], 3, "pim: readings-no-level-column.csv, line 1, field `level_dbm`: missing column; the header has: step_db, level"),
    (&["slope", "--readings", "readings-one-step.csv", "--kind", "attenuator"], 5, "pim: every reading was taken at step 3 dB: a slope needs two or more different steps"),
    (&["slope", "--readings", "readings-ragged.csv", "--kind", "attenuator"], 3, "pim: readings-ragged.csv, line 3: 1 field, but the header has 2 columns"),
    (&["slope", "--readings", "readings-text-level.csv", "--kind", "attenuator"], 3, "pim: readings-text-level.csv, line 3, field `level_dbm`: `strong` is not a number"),
    (&["fix", "--log", "walk-bearing-out-of-range.csv"], 3, "pim: walk-bearing-out-of-range.csv, line 3, field `bearing_deg`: bearing 412 is outside 0–360°"),
    (&["fix", "--log", "walk-diverging.csv"], 5, "pim: the lines of bearing diverge: they meet only behind the observers, so they fix no junction in front of them"),
    (&["fix", "--log", "walk-missing-lat-column.csv"], 3, "pim: walk-missing-lat-column.csv, line 1, field `lat`: missing column; the header has: lon, bearing_deg"),
    (&["fix", "--log", "walk-missing-lat.csv"], 3, "pim: walk-missing-lat.csv, line 3, field `lat`: `lon` is given but `lat` is empty"),
    (&["fix", "--log", "walk-nan-lat.csv"], 3, "pim: walk-nan-lat.csv, line 3, field `lat`: `NaN` is not a finite number"),
    (&["fix", "--log", "walk-negative-sigma.csv"], 3, "pim: walk-negative-sigma.csv, line 2, field `sigma_deg`: σ -3° must be above zero"),
    (&["fix", "--log", "walk-negative-accuracy.csv"], 3, "pim: walk-negative-accuracy.csv, line 2, field `accuracy_m`: accuracy -4 m must not be negative"),
    (&["fix", "--log", "walk-no-rows.csv"], 3, "pim: walk-no-rows.csv: no readings after the header"),
    (&["fix", "--log", "walk-one-reading.csv"], 5, "pim: 1 usable reading: a fix needs at least two bearings from different spots"),
    (&["fix", "--log", "walk-outside-track.csv", "--track", "{F}/walk.gpx"], 3, "pim: walk-outside-track.csv, line 3, field `time`: 2026-11-28T12:00:00Z is outside the track (2026-11-28T09:07:40Z to 2026-11-28T10:22:30Z)"),
    (&["fix", "--log", "walk-parallel.csv"], 5, "pim: the bearings are parallel (they differ by 0.00° at most): they fix no point; take bearings from spots well to the side"),
    (&["fix", "--log", "walk-text-bearing.csv"], 3, "pim: walk-text-bearing.csv, line 2, field `bearing_deg`: `north-east` is not a number"),
    (&["fix", "--log", "walk-torn.csv"], 5, "pim: note: walk-torn.csv, line 3: the last row has no line end: it may be torn by an interrupted write, so it is left out; check it and end it with a line end\npim: 1 usable reading: a fix needs at least two bearings from different spots"),
    (&["explain", "146.34", "--emitters", "emitters-tiny-erp.csv"], 3, "pim: emitters-tiny-erp.csv, line 2, field `erp_dbm`: power -300 dBm is below -60 dBm (1 nW): no emitter to rank"),
    (&["fix", "--log", "walk-tiny-sigma.csv"], 3, "pim: walk-tiny-sigma.csv, line 2, field `sigma_deg`: σ 0.0001° is below 0.1°, finer than any bearing taken by hand; give the spread of the antenna's bearings"),
    (&["explain", "146.34", "--emitters", "emitters-invisible-id.csv"], 3, "pim: emitters-invisible-id.csv, line 3, field `id`: `SKP-152\\u{200b}` holds an invisible character (U+200B); type the id again with plain characters"),
    (&["explain", "146.34", "--emitters", "emitters-control-id.json"], 3, "pim: emitters-control-id.json, line 3, field `id`: `A\\x1b]0;owned\\x07` holds a control character (U+001B); type the id again with plain characters"),
    (&["explain", "146.34", "--emitters", "emitters-spaced-id.json"], 3, "pim: emitters-spaced-id.json, line 2, field `id`: `A ` starts or ends with a space (U+0020); remove it"),
    (&["explain", "146.34", "--emitters", "{F}/emitters.csv", "--on-air", "on-air-offset-beyond-14h.csv", "--heard", "{F}/heard.csv"], 3, "pim: on-air-offset-beyond-14h.csv, line 2, field `start`: `2025-06-14T08:00+15:00` has a UTC offset beyond ±14:00, which no time zone uses"),
    (&["sweep", "--recording", "recording-time-backwards.csv", "--emitters", "{F}/emitters.csv"], 3, "pim: recording-time-backwards.csv, line 5, field `time`: 2026-12-01T09:59:00Z is not after the previous sweep's 2026-12-01T10:00:00Z; a recording's sweeps must follow each other in time"),
    (&["sweep", "--recording", "recording-short-sweep.csv", "--emitters", "{F}/emitters.csv"], 3, "pim: recording-short-sweep.csv, line 5: 2 points, but the first trace has 3; traces combined by maximum hold must share start, stop and point count"),
    (&["sweep", "--recording", "recording-no-time.csv", "--emitters", "{F}/emitters.csv"], 3, "pim: recording-no-time.csv, line 1, field `time`: missing time column: a recording gives each sweep's time (ISO 8601) in a `time` column, or names each file of a folder by its time"),
];

#[test]
fn every_bad_input_gives_its_exact_error() {
    let dir = workspace_root().join("tests").join("bad-inputs");
    let field_logs = workspace_root().join("field-logs").display().to_string();
    let mut failures = Vec::new();
    for (args, code, want) in CATALOGUE {
        let args: Vec<String> = args.iter().map(|a| a.replace("{F}", &field_logs)).collect();
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = pim_in(Some(&dir), &refs);
        let got = String::from_utf8_lossy(&o.stderr)
            .trim()
            .replace(&field_logs, "{F}");
        if o.status.code() != Some(*code) || got != *want {
            failures.push(format!(
                "{args:?}\n  want {code}: {want}\n  got  {:?}: {got}",
                o.status.code()
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    // every file of the catalogue is exercised
    let files = std::fs::read_dir(&dir).unwrap().count();
    assert_eq!(files, CATALOGUE.len());
}

/// A line longer than 64 KiB is not a table row but a damaged file: refused at once,
/// without reading it whole (made here rather than kept in the repository).
#[test]
fn a_huge_line_is_refused() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("emitters-huge-line.csv");
    let mut text = b"id,freq_mhz,note\nA,146.94,".to_vec();
    text.extend(std::iter::repeat_n(b'x', 200_000));
    text.extend(b"\nB,152.84,\n");
    std::fs::write(&file, text).unwrap();
    let o = pim_in(
        Some(dir),
        &["explain", "146.34", "--emitters", "emitters-huge-line.csv"],
    );
    assert_eq!(o.status.code(), Some(3));
    assert_eq!(
        String::from_utf8_lossy(&o.stderr).trim(),
        "pim: emitters-huge-line.csv, line 2: longer than 65536 bytes; expected a CSV text table"
    );
}
