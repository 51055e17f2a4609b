//! One truth in every output (issue 24): one candidate rendered as a table, CSV, JSON and
//! Markdown shows the same values, within the precision the README states, under the same
//! names; the fix's position agrees across its table, JSON, GeoJSON and KML; products
//! and candidates are counted alike in every format; no number is written as `-0`.

use crate::support::{field_log, pim, stderr_of, stdout_of};

fn run(args: &[&str]) -> String {
    let o = pim(args);
    assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
    stdout_of(&o)
}

/// The cells of a text table's row `n` (from 0) with their headers: the table is the
/// block whose second line is the rule of `─`.
fn table_row(text: &str, first_header: &str, n: usize) -> Vec<(String, String)> {
    let lines: Vec<&str> = text.lines().collect();
    let at = lines
        .iter()
        .position(|l| l.starts_with(first_header) && !l.contains(':'))
        .unwrap_or_else(|| panic!("no table under `{first_header}`: {text}"));
    // columns by the rule's runs of `─`
    let rule: Vec<char> = lines[at + 1].chars().collect();
    let mut spans = Vec::new();
    let mut start = None;
    for (i, c) in rule.iter().chain(std::iter::once(&' ')).enumerate() {
        match (c, start) {
            ('─', None) => start = Some(i),
            (' ', Some(s)) => {
                spans.push((s, i));
                start = None;
            }
            _ => {}
        }
    }
    let cut = |line: &str, (s, e): (usize, usize)| -> String {
        line.chars()
            .skip(s)
            .take(e - s)
            .collect::<String>()
            .trim()
            .to_string()
    };
    spans
        .iter()
        .map(|&span| (cut(lines[at], span), cut(lines[at + 2 + n], span)))
        .collect()
}

fn number(text: &str) -> f64 {
    let t = text.trim_start_matches(['≤', '+']).trim_end_matches('*');
    t.replace('−', "-")
        .parse()
        .unwrap_or_else(|_| panic!("not a number: `{text}`"))
}

fn cell<'a>(row: &'a [(String, String)], header: &str) -> &'a str {
    &row.iter()
        .find(|(h, _)| h == header)
        .unwrap_or_else(|| panic!("no column `{header}` in {row:?}"))
        .1
}

/// The stated precision (README, "Numbers"): levels to 0.01 dB in JSON and CSV, 0.1 dB
/// in tables and Markdown; frequencies to the hertz.
#[test]
fn one_candidate_reads_alike_in_every_format() {
    let tx = field_log("emitters.csv");
    let tx = tx.to_str().unwrap();
    let base = [
        "explain",
        "146.34",
        "--emitters",
        tx,
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
        "--limit",
        "2",
        "--wide",
    ];
    let with = |format: &str| {
        let mut a = base.to_vec();
        a.extend(["--format", format]);
        run(&a)
    };
    let json: serde_json::Value = serde_json::from_str(&with("json")).unwrap();
    // the second candidate: made at a junction, so every level term is there
    let c = &json["candidates"][1];
    assert_eq!(c["mechanism"], "junction", "{c}");
    let t = &c["level_terms"];
    let j = &t["junction"];
    let f = |v: &serde_json::Value| v.as_f64().unwrap_or_else(|| panic!("{v} in {c}"));

    // CSV: the same quantities under the JSON's names
    let csv = with("csv");
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let row: Vec<&str> = lines.nth(1).unwrap().split(',').collect();
    let col = |name: &str| -> &str {
        let i = header
            .iter()
            .position(|h| *h == name)
            .unwrap_or_else(|| panic!("CSV has no `{name}`: {header:?}"));
        row[i]
    };
    assert_eq!(col("formula"), c["formula"]);
    assert_eq!(number(col("product_mhz")), f(&c["product_mhz"]));
    assert_eq!(number(col("offset_khz")), f(&c["offset_khz"]));
    assert_eq!(number(col("bandwidth_khz")), f(&c["bandwidth_khz"]));
    for (csv_name, json_value) in [
        ("predicted_level_dbm", &c["predicted_level_dbm"]),
        ("drive_db", &j["drive_db"]),
        ("form_db", &j["form_db"]),
        ("order_db", &j["order_db"]),
        ("even_order_db", &j["even_order_db"]),
        ("path_db", &t["path_db"]),
        ("channel_db", &t["channel_db"]),
        ("in_channel_dbm", &t["in_channel_dbm"]),
        ("relative_db", &c["relative_db"]),
    ] {
        assert!(
            (number(col(csv_name)) - f(json_value)).abs() < 0.0051,
            "{csv_name}: CSV {} JSON {json_value}",
            col(csv_name)
        );
        // the JSON itself to 0.01 dB
        let v = f(json_value);
        assert!(
            ((v * 100.0).round() - v * 100.0).abs() < 1e-6,
            "{csv_name} {v}"
        );
    }
    // one sign: the terms add up to the level in the channel
    let sum = f(&t["source_level_dbm"]) + f(&t["path_db"]) + f(&t["channel_db"]);
    assert!((sum - f(&t["in_channel_dbm"])).abs() < 0.02, "{t}");
    assert!(f(&t["path_db"]) < 0.0, "a loss is a negative gain: {t}");

    // the table (--wide) and the Markdown: the same columns, the same values to 0.1 dB
    let table = with("table");
    let md = with("markdown");
    let md_row: Vec<(String, String)> = {
        let lines: Vec<&str> = md.lines().filter(|l| l.starts_with('|')).collect();
        let split = |l: &str| -> Vec<String> {
            l.trim_matches('|')
                .split(" | ")
                .map(|s| s.trim().replace('\\', ""))
                .collect()
        };
        split(lines[0]).into_iter().zip(split(lines[3])).collect()
    };
    let table_row = table_row(&table, "#", 1);
    for row in [&table_row, &md_row] {
        assert_eq!(cell(row, "product"), c["formula"], "{row:?}");
        assert_eq!(number(cell(row, "order")), f(&c["order"]));
        assert!((number(cell(row, "at MHz")) - f(&c["product_mhz"])).abs() < 5e-5);
        assert!((number(cell(row, "offset kHz")) - f(&c["offset_khz"])).abs() < 0.051);
        assert!((number(cell(row, "width kHz")) - f(&c["bandwidth_khz"])).abs() < 0.051);
        for (header, value) in [
            ("rel dB", f(&c["relative_db"])),
            ("source dBm", f(&c["predicted_level_dbm"])),
            ("drive dB", f(&j["drive_db"])),
            ("form dB", f(&j["form_db"])),
            ("order dB", f(&j["order_db"]) + f(&j["even_order_db"])),
            ("path dB", f(&t["path_db"])),
            ("chan dB", f(&t["channel_db"])),
        ] {
            let shown = number(cell(row, header));
            assert!(
                (shown - value).abs() < 0.051 || cell(row, header).starts_with('≤'),
                "{header}: {shown} against {value}"
            );
        }
    }
    // the Markdown has every column of the wide table, and the kinds and owners beside
    let table_headers: Vec<&str> = table_row.iter().map(|(h, _)| h.as_str()).collect();
    let md_headers: Vec<&str> = md_row.iter().map(|(h, _)| h.as_str()).collect();
    assert_eq!(md_headers[..table_headers.len()], table_headers[..]);

    // the counts: one definition, the same in the table's words and in JSON
    let counted = format!(
        "{}{} products land in the channel, making {} candidates",
        if json["counted_all"] == true {
            ""
        } else {
            "at least "
        },
        json["products"],
        json["candidates_total"]
    );
    assert!(table.contains(&counted), "{counted}: {table}");
    assert!(md.contains(&counted), "{counted}: {md}");
    assert_eq!(json["candidates_shown"], 2);

    // never -0
    for text in [&csv, &table, &md, &with("json")] {
        assert!(!text.contains("-0.00,") && !text.contains("-0.0 ") && !text.contains(": -0.0,"));
    }
}

/// The fix's position and bearings: the same in its table, JSON, GeoJSON and KML, to the
/// stated 1e-7° (the table's 1e-6°), bearings to 0.1° from true north.
#[test]
fn the_fix_reads_alike_in_every_format() {
    let log = field_log("walk.csv");
    let log = log.to_str().unwrap();
    let with = |format: &str| run(&["fix", "--log", log, "--format", format]);
    let json: serde_json::Value = serde_json::from_str(&with("json")).unwrap();
    let (lat, lon) = (
        json["lat_deg"].as_f64().unwrap(),
        json["lon_deg"].as_f64().unwrap(),
    );
    for v in [lat, lon] {
        assert!(((v * 1e7).round() - v * 1e7).abs() < 1e-3, "{v}");
    }
    let table = with("table");
    assert!(
        table.contains(&format!("{lat:.6}, {lon:.6}")),
        "{lat}, {lon}: {table}"
    );
    let geojson: serde_json::Value = serde_json::from_str(&with("geojson")).unwrap();
    let features = geojson["features"].as_array().unwrap();
    let fix = features
        .iter()
        .find(|f| f["properties"]["kind"] == "fix")
        .unwrap();
    assert_eq!(fix["geometry"]["coordinates"][0].as_f64().unwrap(), lon);
    assert_eq!(fix["geometry"]["coordinates"][1].as_f64().unwrap(), lat);
    let kml = with("kml");
    assert!(kml.contains(&format!("{lon:.7},{lat:.7},0")), "{kml}");
    // each bearing as the fix used it (true north), to 0.1°, in the JSON and the GeoJSON
    for r in json["residuals"].as_array().unwrap() {
        let b = r["bearing_deg"].as_f64().unwrap();
        assert!(((b * 10.0).round() - b * 10.0).abs() < 1e-6, "{b}");
        let line = &r["line"];
        let g = features
            .iter()
            .find(|f| f["properties"]["kind"] == "bearing" && &f["properties"]["line"] == line)
            .unwrap();
        assert_eq!(g["properties"]["bearing_deg"].as_f64().unwrap(), b);
        assert!(table.contains(&format!("{b:.1}")), "{b}: {table}");
    }
}

/// `pim log --list` shows the bearings the fix uses (true north) and the logged north
/// beside a magnetic one, so its residuals add up; every column has a header.
#[test]
fn the_log_listing_shows_true_bearings() {
    let log = field_log("walk.csv");
    let log = log.to_str().unwrap();
    let fix: serde_json::Value =
        serde_json::from_str(&run(&["fix", "--log", log, "--format", "json"])).unwrap();
    let list = run(&["log", "--log", log, "--list"]);
    let listed: serde_json::Value =
        serde_json::from_str(&run(&["log", "--log", log, "--list", "--format", "json"])).unwrap();
    for r in fix["residuals"].as_array().unwrap() {
        let b = r["bearing_deg"].as_f64().unwrap();
        let row = listed["readings"]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["line"] == r["line"])
            .unwrap();
        assert_eq!(row["bearing_deg"].as_f64().unwrap(), b, "{row}");
        assert!(list.contains(&format!("{b:.1}")), "{b}: {list}");
    }
    // the walk's magnetic readings: logged 246.9 and 93.1
    assert!(
        list.contains("246.9 mag") && list.contains("261.2"),
        "{list}"
    );
    let header = list.lines().nth(2).unwrap();
    assert!(
        header.contains("status") && header.contains("true °"),
        "{list}"
    );
    assert!(list.lines().all(|l| l.chars().count() <= 100), "{list}");
}

/// Every terminal table keeps to 100 columns by default.
#[test]
fn tables_fit_the_terminal() {
    let tx = field_log("emitters.csv");
    let rx = field_log("receivers.csv");
    let trace = field_log("trace.csv");
    let walk = field_log("walk.csv");
    let channels = field_log("plan-candidates.csv");
    let s = |p: &std::path::PathBuf| p.to_str().unwrap().to_string();
    let (tx, rx, trace, walk, channels) = (s(&tx), s(&rx), s(&trace), s(&walk), s(&channels));
    for args in [
        vec![
            "explain",
            "146.34",
            "--emitters",
            &tx,
            "--rx-lat",
            "45.1046",
            "--rx-lon",
            "-122.3",
        ],
        vec!["study", "--emitters", &tx, "--receivers", &rx],
        vec!["sweep", "--emitters", &tx, &trace],
        vec!["fix", "--log", &walk],
        vec!["log", "--log", &walk, "--list"],
        vec!["next", "--log", &walk, "--radius-m", "150"],
        vec!["plan", "--channels", &channels],
    ] {
        let out = run(&args);
        for line in out.lines() {
            assert!(line.chars().count() <= 100, "{args:?}: {line}");
        }
    }
}

/// `pim study` says how the levels are worked out once, then each receiver.
#[test]
fn the_study_explains_once() {
    let tx = field_log("emitters.csv");
    let rx = field_log("receivers.csv");
    let out = run(&[
        "study",
        "--emitters",
        tx.to_str().unwrap(),
        "--receivers",
        rx.to_str().unwrap(),
    ]);
    assert_eq!(
        out.matches("In the channel at the receiver:").count(),
        1,
        "{out}"
    );
    assert!(out.matches("━━ ").count() >= 2, "{out}");
    assert!(
        !out.contains(" 1 products") && !out.contains(" 1 candidates"),
        "{out}"
    );
}
