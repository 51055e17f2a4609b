//! The walk page in a real headless browser: Chromium driven over WebDriver
//! (chromedriver, W3C WebDriver protocol) with the position mocked through the DevTools
//! protocol's `Emulation.setGeolocationOverride`. A scripted walk of six readings must
//! write the same log rows, and give the same fix, as `pim log` followed by `pim fix` on
//! a copy; undo takes the last row back; a request without the token is refused with
//! 403 and leaves the log as it was. Skips (with the reason printed) where Chromium or
//! chromedriver is not installed (`.ci/install-browser` installs both).

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use crate::browser::{http, Browser, Process, PHONE_PX};
use crate::support::{field_log, pim_bin, stdout_of, workspace_root};
use serde_json::{json, Value};

fn read_rows(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect()
}

/// Splits a CSV row of the log (quoted fields may hold commas).
fn cells(row: &str) -> Vec<String> {
    let mut out = vec![String::new()];
    let mut quoted = false;
    let mut chars = row.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '"' if quoted && chars.peek() == Some(&'"') => {
                out.last_mut().unwrap().push('"');
                chars.next();
            }
            '"' => quoted = !quoted,
            ',' if !quoted => out.push(String::new()),
            c => out.last_mut().unwrap().push(c),
        }
    }
    out
}

/// Puts the phone at a position of `accuracy_m` and waits for the page to show it.
fn phone_at(browser: &Browser, lat: f64, lon: f64, accuracy_m: u32) {
    browser.cdp(
        "Emulation.setGeolocationOverride",
        json!({"latitude": lat, "longitude": lon, "accuracy": accuracy_m}),
    );
    browser.wait_for(
        &format!(
            "return document.getElementById('accuracy').textContent.indexOf('± {accuracy_m} m') >= 0;"
        ),
        "the phone's position on the page",
    );
}

#[test]
fn a_walk_on_the_page_matches_pim_log_and_pim_fix() {
    let Some(browser) = Browser::phone(PHONE_PX) else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("walk.csv");

    // pim walk, on a free port of the loopback; its first line is the page's address.
    let mut walk = Command::new(pim_bin())
        .args(["walk", "--log"])
        .arg(&log)
        .arg("--structures")
        .arg(field_log("structures.csv"))
        .arg("--emitters")
        .arg(field_log("emitters.csv"))
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut first = String::new();
    let mut stdout = BufReader::new(walk.stdout.take().unwrap());
    stdout.read_line(&mut first).unwrap();
    std::thread::spawn(move || std::io::copy(&mut stdout, &mut std::io::sink()));
    let walk = Process(walk);
    let page = first.trim().to_string();
    assert!(
        page.starts_with("http://127.0.0.1:") && page.contains("/?token="),
        "{page}"
    );
    let token = page.split("token=").nth(1).unwrap().to_string();
    assert_eq!(token.len(), 32, "a 128-bit token in hex");
    let origin = page.split("/?").next().unwrap().to_string();

    let agent = browser.agent.clone();
    browser.cdp(
        "Browser.grantPermissions",
        json!({"origin": origin, "permissions": ["geolocation"]}),
    );
    browser.call("POST", "/url", Some(json!({ "url": page })));
    browser.wait_for(
        "return document.getElementById('count').textContent.indexOf('0 readings') === 0;",
        "the page to load the state",
    );

    // Six readings of the demo walk (field-logs/walk.csv): position from the mocked
    // geolocation, bearing, north, level and note typed; Enter saves the first three,
    // the button the rest.
    let demo = read_rows(&field_log("walk.csv"));
    let readings: Vec<Vec<String>> = demo[1..7].iter().map(|r| cells(r)).collect();
    for (i, r) in readings.iter().enumerate() {
        let (lat, lon): (f64, f64) = (r[1].parse().unwrap(), r[2].parse().unwrap());
        browser.cdp(
            "Emulation.setGeolocationOverride",
            json!({"latitude": lat, "longitude": lon, "accuracy": 4.0}),
        );
        browser.click("#locate");
        browser.wait_for(
            &format!("return document.getElementById('lat').value === '{lat:.7}';"),
            "the mocked position",
        );
        assert_eq!(browser.value("#lon"), format!("{lon:.7}"));
        assert!(
            browser.text("#accuracy").contains("± 4 m"),
            "{}",
            browser.text("#accuracy")
        );
        browser.click(&format!("input[name=north][value={}]", r[4]));
        if i == 0 {
            browser.click("#more summary");
        }
        browser.type_into("#level_dbm", &r[6]);
        browser.type_into("#note", &r[7]);
        if i < 3 {
            browser.type_into("#bearing_deg", &format!("{}\n", r[3]));
        } else {
            browser.type_into("#bearing_deg", &r[3]);
            browser.click("#save");
        }
        browser.wait_for(
            &format!(
                "return document.getElementById('status').textContent === 'Saved #{}, line {}{}';",
                i + 1,
                i + 2,
                if i == 0 { " (new log)" } else { "" }
            ),
            "the save",
        );
    }
    let page_fix = browser.text("#fix-position");
    let page_region = browser.text("#fix-region");
    let page_cep = browser.text("#fix-cep");
    assert!(
        browser.text("#next-walk").starts_with("Next: walk "),
        "{}",
        browser.text("#next-walk")
    );
    assert!(browser.script("return document.querySelectorAll('#map svg').length === 1 && document.querySelectorAll('#residuals tbody tr').length === 6;") == Value::Bool(true));

    // The documentation pictures: the form after a save, and the fix with its map.
    // Written into docs/ only when PIM_UPDATE_DOCS is set, so a test run leaves the
    // source tree alone.
    let docs = match std::env::var_os("PIM_UPDATE_DOCS") {
        Some(_) => workspace_root().join("docs"),
        None => dir.path().to_path_buf(),
    };
    std::fs::create_dir_all(&docs).unwrap();
    browser.click("#more summary");
    browser.script("window.scrollTo(0, 0); document.activeElement.blur();");
    browser.screenshot(&docs.join("walk-page.png"));
    browser.script("document.getElementById('fix').scrollIntoView(true);");
    browser.screenshot(&docs.join("walk-page-fix.png"));
    for name in ["walk-page.png", "walk-page-fix.png"] {
        let png = std::fs::read(docs.join(name)).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
        // IHDR: 390 × 844 CSS pixels at a device pixel ratio of 2.
        let size = |at: usize| u32::from_be_bytes([png[at], png[at + 1], png[at + 2], png[at + 3]]);
        assert_eq!((size(16), size(20)), (780, 1688), "{name}");
    }

    // At 390 × 844 the page never scrolls sideways and no visible text, the map's
    // labels included (by their scale on the screen), renders under 12 px (common
    // practice for the least legible size on a handheld screen); the map shows where
    // the phone stands and names the readings by number and time.
    browser.script("window.scrollTo(0, 0);");
    let least = 12.0;
    let m = browser.call(
        "POST",
        "/execute/sync",
        Some(json!({"script": crate::browser::MEASURE, "args": [least]})),
    );
    eprintln!("walk page measured at {PHONE_PX:?}: {m}");
    assert!(
        m["scrollWidth"].as_f64().unwrap() <= PHONE_PX.0 as f64,
        "{m}"
    );
    assert!(m["svg"].as_u64().unwrap() > 5, "{m}");
    assert_eq!(m["small"], json!([]), "texts under {least} px: {m}");
    browser.wait_for(
        "var t = document.getElementById('map').textContent; return t.indexOf('you are here') >= 0 && /#6 \\d\\d:\\d\\d/.test(t);",
        "the walker and the named readings on the map",
    );
    assert!(
        browser.text("#next-walk").ends_with("from where you stand"),
        "{}",
        browser.text("#next-walk")
    );
    assert!(browser
        .text("#residuals tbody tr:first-child td:first-child")
        .starts_with("#1 "));
    if std::env::var_os("PIM_UPDATE_DOCS").is_some() {
        // the form once the cautions are acknowledged (walk-page.png shows them)
        browser.click("#cautions-ok");
        browser.script("window.scrollTo(0, 0); document.activeElement.blur();");
        browser.screenshot(&docs.join("walk-390x844.png"));
        browser.script("document.getElementById('fix').scrollIntoView(true);");
        browser.screenshot(&docs.join("walk-map-390x844.png"));
    }

    // A position less accurate than 20 m asks before the reading is saved; waiting
    // saves nothing.
    phone_at(&browser, 45.1040, -122.4150, 35);
    let before = std::fs::read(&log).unwrap();
    browser.type_into("#bearing_deg", "120\n");
    browser.wait_for(
        "var a = document.getElementById('ask'); return !a.hidden && a.textContent.indexOf('± 35 m') >= 0;",
        "the question before saving a coarse position",
    );
    browser.click("#ask-no");
    assert_eq!(std::fs::read(&log).unwrap(), before);
    // back where the walk stood, sharp
    let (lat, lon): (f64, f64) = (
        readings[5][1].parse().unwrap(),
        readings[5][2].parse().unwrap(),
    );
    phone_at(&browser, lat, lon, 4);

    // A bad value is refused beside its field and writes nothing.
    let before = std::fs::read(&log).unwrap();
    browser.type_into("#bearing_deg", "400\n");
    browser.wait_for(
        "return document.getElementById('err-bearing_deg').textContent.indexOf('outside 0–360') >= 0;",
        "the error beside the bearing",
    );
    assert_eq!(std::fs::read(&log).unwrap(), before);

    // The same readings through `pim log` (with each row's time) on a copy, then `pim fix`.
    let rows = read_rows(&log);
    assert_eq!(rows.len(), 7, "{rows:?}");
    let copy = dir.path().join("copy.csv");
    for (row, r) in rows[1..].iter().zip(&readings) {
        let c = cells(row);
        let out = Command::new(pim_bin())
            .arg("log")
            .arg(&copy)
            .args(["--lat", &c[1], "--lon", &c[2], "--bearing-deg", &r[3]])
            .args(["--north", &r[4], "--level-dbm", &r[6], "--note", &r[7]])
            .args(["--accuracy-m", &c[3]])
            .args(["--time", &c[0]])
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    assert_eq!(
        read_rows(&copy),
        rows,
        "the page writes what pim log writes"
    );
    let fix_of = |path: &Path| -> Value {
        let out = Command::new(pim_bin())
            .args(["fix", "--format", "json", "--log"])
            .arg(path)
            .output()
            .unwrap();
        assert!(out.status.success());
        serde_json::from_str(&stdout_of(&out)).unwrap()
    };
    let (fix_walk, fix_copy) = (fix_of(&log), fix_of(&copy));
    assert_eq!(fix_walk, fix_copy);
    let lat = fix_copy["lat_deg"].as_f64().unwrap();
    let lon = fix_copy["lon_deg"].as_f64().unwrap();
    // the page prints the fix to 6 decimals from the state's rounded JSON; a value on a
    // rounding edge may print one unit of the last place apart (0.1 m)
    let (page_lat, page_lon) = page_fix.split_once(", ").unwrap();
    let near = |shown: &str, v: f64| (shown.trim().parse::<f64>().unwrap() - v).abs() < 1.5e-6;
    assert!(
        near(page_lat, lat) && near(page_lon, lon),
        "{page_fix} vs {lat}, {lon}"
    );
    let e = &fix_copy["ellipse"];
    // the page names the region pim fix claims: the ellipse, or the contour and its reach
    let claimed = if fix_copy["region_kind"] == "likelihood" {
        format!(
            "95% region: the likelihood contour on the map, reaching {:.0} m",
            fix_copy["reach_m"].as_f64().unwrap()
        )
    } else {
        format!(
            "95% ellipse: semi-axes {:.1} × {:.1} m",
            e["semi_major_m"].as_f64().unwrap(),
            e["semi_minor_m"].as_f64().unwrap()
        )
    };
    assert!(page_region.starts_with(&claimed), "{page_region}");
    assert!(
        page_cep.starts_with(&format!("CEP {:.1} m", fix_copy["cep_m"].as_f64().unwrap())),
        "{page_cep}"
    );

    // Undo names the reading it takes back and asks once; a double tap on the answer
    // takes back one reading; the page shows five; redo puts the row back byte for byte.
    let whole = std::fs::read(&log).unwrap();
    browser.click("#undo");
    let question = browser.text("#ask-text");
    let last = cells(&rows[6]);
    assert!(
        question.starts_with("Take back reading #6 ")
            && question.contains("(line 7)")
            && question.contains(&format!(
                "bearing {:.1}° {}",
                last[4].parse::<f64>().unwrap(),
                last[5]
            ))
            && question.contains(&last[8]),
        "{question}"
    );
    browser.script("var b = document.getElementById('ask-yes'); b.click(); b.click();");
    browser.wait_for(
        "return document.getElementById('status').textContent.indexOf('Took back #6') === 0 && document.querySelectorAll('#residuals tbody tr').length === 5;",
        "the undo",
    );
    assert_eq!(read_rows(&log), rows[..6].to_vec());
    // the server refuses a stale undo too: the same line asked again takes nothing
    let (status, _) = http(
        agent
            .post(&format!("{origin}/undo?token={token}"))
            .set("Content-Type", "application/x-www-form-urlencoded"),
        None,
    );
    assert_eq!(status, 422, "an undo that names no reading");
    let stale = agent
        .post(&format!("{origin}/undo?token={token}"))
        .set("Content-Type", "application/x-www-form-urlencoded")
        .send_form(&[("line", "7"), ("row", rows[6].as_str())]);
    assert!(
        matches!(stale, Err(ureq::Error::Status(409, _))),
        "{stale:?}"
    );
    assert_eq!(read_rows(&log), rows[..6].to_vec());
    browser.script("var b = document.getElementById('redo'); b.click(); b.click();");
    browser.wait_for(
        "return document.getElementById('status').textContent.indexOf('Put back, line 7') === 0 && document.querySelectorAll('#residuals tbody tr').length === 6;",
        "the redo",
    );
    assert_eq!(
        std::fs::read(&log).unwrap(),
        whole,
        "redo restores the log byte for byte"
    );

    // Without the token (or with a wrong one) nothing is served or written.
    let before = std::fs::read(&log).unwrap();
    let form = "lat=45.1&lon=-122.4&bearing_deg=10";
    for path in [
        "/".to_string(),
        "/state".to_string(),
        format!("/?token={}", "0".repeat(32)),
    ] {
        let (status, _) = http(agent.get(&format!("{origin}{path}")), None);
        assert_eq!(status, 403, "GET {path}");
    }
    for path in ["/reading", "/undo", "/reading?token=wrong"] {
        let r = agent
            .post(&format!("{origin}{path}"))
            .set("Content-Type", "application/x-www-form-urlencoded")
            .send_string(form);
        let status = match r {
            Ok(r) => r.status(),
            Err(ureq::Error::Status(c, _)) => c,
            Err(e) => panic!("{e}"),
        };
        assert_eq!(status, 403, "POST {path}");
    }
    // With the token but from another page's origin, or an oversized body: refused too.
    let status = |r: Result<ureq::Response, ureq::Error>| match r {
        Ok(r) => r.status(),
        Err(ureq::Error::Status(c, _)) => c,
        Err(e) => panic!("{e}"),
    };
    let with_token = format!("{origin}/reading?token={token}");
    assert_eq!(
        status(
            agent
                .post(&with_token)
                .set("Origin", "http://attacker.example")
                .send_string(form)
        ),
        403
    );
    // refused with 413; under load the server may close before the client has sent it
    // all, which refuses it just the same
    match agent.post(&with_token).send_string(&"x".repeat(20_000)) {
        Err(ureq::Error::Status(413, _)) | Err(ureq::Error::Transport(_)) => {}
        Ok(r) => panic!("an oversized body was answered {}", r.status()),
        Err(e) => panic!("{e}"),
    }
    assert_eq!(std::fs::read(&log).unwrap(), before, "the log is unchanged");

    // Ctrl-C stops the server and leaves the log whole.
    browser.call("DELETE", "", None);
    let mut walk = walk;
    let pid = walk.0.id().to_string();
    assert!(Command::new("kill")
        .args(["-INT", &pid])
        .status()
        .unwrap()
        .success());
    let start = Instant::now();
    let code = loop {
        if let Some(s) = walk.0.try_wait().unwrap() {
            break s;
        }
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "pim walk did not stop"
        );
        std::thread::sleep(Duration::from_millis(50));
    };
    assert!(code.success(), "{code:?}");
    assert_eq!(std::fs::read(&log).unwrap(), before);
}
