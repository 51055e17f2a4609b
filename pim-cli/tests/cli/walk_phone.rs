//! The walk page as a phone on the site's network opens it (issue 26), in a headless
//! Chromium at 390 × 844 mapping the name `walk.test` to 127.0.0.1
//! (`--host-resolver-rules`): over HTTPS (`pim walk --listen 0.0.0.0:0 --name
//! walk.test`, its certificate accepted with the W3C WebDriver capability
//! `acceptInsecureCerts`) the page is a secure context and its position fields follow
//! the phone's position (mocked through the DevTools protocol's
//! `Emulation.setGeolocationOverride`) as it moves, and a position older than 15 s asks
//! before a reading is saved with it; over plain HTTP under the same name (a loopback
//! server) the browser gives no position and the page says how to get one. Skips where
//! Chromium or chromedriver is not installed.

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Command, Stdio};

use serde_json::json;

use crate::browser::{Browser, Process, PHONE_PX};
use crate::support::{pim_bin, scratch};

/// `pim walk` on `listen` with the name walk.test: the process and the page's address
/// under that name.
fn start(log: &Path, listen: &str) -> (Process, String) {
    let mut child = Command::new(pim_bin())
        .args(["walk", "--listen", listen, "--name", "walk.test", "--log"])
        .arg(log)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut stdout = BufReader::new(child.stdout.take().unwrap());
    let mut url = String::new();
    stdout.read_line(&mut url).unwrap();
    std::thread::spawn(move || std::io::copy(&mut stdout, &mut std::io::sink()));
    let url = url.trim().to_string();
    let (scheme, rest) = url.split_once("://").unwrap();
    let (authority, path) = rest.split_once('/').unwrap();
    let port = authority.rsplit(':').next().unwrap();
    (
        Process(child),
        format!("{scheme}://walk.test:{port}/{path}"),
    )
}

#[test]
fn the_page_follows_the_phone_over_https_and_says_how_without() {
    let Some(browser) = Browser::phone_with(
        PHONE_PX,
        &["--host-resolver-rules=MAP walk.test 127.0.0.1".to_string()],
        true,
    ) else {
        return;
    };
    let tmp = scratch();
    let log = tmp.path().join("walk.csv");

    let (_https, page) = start(&log, "0.0.0.0:0");
    assert!(page.starts_with("https://walk.test:"), "{page}");
    let origin = page.split("/?").next().unwrap().to_string();
    browser.cdp(
        "Browser.grantPermissions",
        json!({"origin": origin, "permissions": ["geolocation"]}),
    );
    let at = |lat: f64, lon: f64| {
        browser.cdp(
            "Emulation.setGeolocationOverride",
            json!({"latitude": lat, "longitude": lon, "accuracy": 5.0}),
        );
    };
    at(45.1032, -122.4161);
    browser.call("POST", "/url", Some(json!({ "url": page })));
    browser.wait_for(
        "return document.getElementById('count').textContent.indexOf('0 readings') === 0;",
        "the page over HTTPS",
    );
    assert_eq!(
        browser.script("return window.isSecureContext;"),
        json!(true)
    );
    // the fields follow the phone as it moves, twice, with no tap
    for (lat, lon) in [
        (45.1032, -122.4161),
        (45.1041, -122.4152),
        (45.1050, -122.4140),
    ] {
        at(lat, lon);
        browser.wait_for(
            &format!(
                "return document.getElementById('lat').value === '{lat:.7}' && document.getElementById('lon').value === '{lon:.7}';"
            ),
            "the fields to follow the phone",
        );
    }
    assert!(
        browser.text("#accuracy").contains("± 5 m"),
        "{}",
        browser.text("#accuracy")
    );
    assert_eq!(browser.text("#position-help"), "");

    // A position older than 15 s asks before a reading is saved with it; waiting for a
    // fresh one saves nothing.
    browser.wait_for(
        "return document.getElementById('accuracy').textContent.indexOf('wait for a fresh') >= 0;",
        "the position to grow old",
    );
    browser.type_into("#bearing_deg", "45\n");
    browser.wait_for(
        "var a = document.getElementById('ask'); return !a.hidden && / s old/.test(a.textContent);",
        "the question before saving an old position",
    );
    browser.click("#ask-no");
    assert!(!log.exists(), "nothing saved");
    // asked and answered, it is saved with its accuracy
    browser.click("#save");
    browser.wait_for(
        "return !document.getElementById('ask').hidden;",
        "the question again",
    );
    browser.click("#ask-yes");
    browser.wait_for(
        "return document.getElementById('status').textContent === 'Saved, line 2 (new log)';",
        "the save",
    );
    let text = std::fs::read_to_string(&log).unwrap();
    let rows: Vec<&str> = text.lines().collect();
    assert_eq!(
        rows[0],
        "time,lat,lon,accuracy_m,bearing_deg,north,sigma_deg,level_dbm,note"
    );
    assert!(
        rows[1].contains(",45.1050000,-122.4140000,5.0,45,true,"),
        "{}",
        rows[1]
    );

    // Over plain HTTP under the same name the page is no secure context: it says how
    // to get a position.
    let plain_log = tmp.path().join("plain.csv");
    let (_http, plain) = start(&plain_log, "127.0.0.1:0");
    assert!(plain.starts_with("http://walk.test:"), "{plain}");
    browser.call("POST", "/url", Some(json!({ "url": plain })));
    browser.wait_for(
        "return document.getElementById('count').textContent.indexOf('0 readings') === 0;",
        "the page over HTTP",
    );
    assert_eq!(
        browser.script("return window.isSecureContext;"),
        json!(false)
    );
    let help = browser.text("#position-help");
    assert!(
        help.contains("Type the position") && help.contains("pim fix --track"),
        "{help}"
    );
}
