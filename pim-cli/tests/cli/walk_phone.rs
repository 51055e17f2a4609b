//! The walk page as a phone on the site's network opens it (issue 26), in a headless
//! Chromium at 390 × 844 mapping the name `walk.test` to 127.0.0.1
//! (`--host-resolver-rules`): over HTTPS (`pim walk --listen 0.0.0.0:0 --name
//! walk.test`, its certificate accepted with the W3C WebDriver capability
//! `acceptInsecureCerts`) the page is a secure context and its position fields follow
//! the phone's position (mocked through the DevTools protocol's
//! `Emulation.setGeolocationOverride`) as it moves, and a position older than 15 s asks
//! before a reading is saved with it; over plain HTTP under the same name (a loopback
//! server) the browser gives no position and the page says how to get one. Skips where
//! Chromium or chromedriver is not installed. Without a browser: the next spot's
//! cautions, the map with the walker and the walk from the walker's position.

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Command, Stdio};

use serde_json::json;

use crate::browser::{Browser, Process, PHONE_PX};
use crate::support::{pim_bin, scratch};

/// `pim walk --log LOG` with `args`: the process and the address it printed first.
fn start(log: &Path, args: &[String]) -> (Process, String) {
    let mut child = Command::new(pim_bin())
        .args(["walk", "--log"])
        .arg(log)
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut stdout = BufReader::new(child.stdout.take().unwrap());
    let mut url = String::new();
    stdout.read_line(&mut url).unwrap();
    std::thread::spawn(move || std::io::copy(&mut stdout, &mut std::io::sink()));
    (Process(child), url.trim().to_string())
}

/// `pim walk` on `listen` with the name walk.test: the process and the page's address
/// under that name.
fn start_named(log: &Path, listen: &str) -> (Process, String) {
    let args = ["--listen", listen, "--name", "walk.test"].map(String::from);
    let (process, url) = start(log, &args);
    let (scheme, rest) = url.split_once("://").unwrap();
    let (authority, path) = rest.split_once('/').unwrap();
    let port = authority.rsplit(':').next().unwrap();
    (process, format!("{scheme}://walk.test:{port}/{path}"))
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

    let (_https, page) = start_named(&log, "0.0.0.0:0");
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
        "return document.getElementById('status').textContent === 'Saved #1, line 2 (new log)';",
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
    let (_http, plain) = start_named(&plain_log, "127.0.0.1:0");
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

/// What the page asks of the server for a phone, without a browser: the next spot (the
/// only candidate, 40 m north of the demo's guyed tower, whose highest antenna is at
/// 46 m) carries the tower's caution; the map with the phone's position shows it and
/// names the readings by number and time; positions out of range are refused; the walk
/// to the next spot is from the position sent.
#[test]
fn the_next_spot_near_a_tower_carries_its_caution_and_the_map_its_walker() {
    let tmp = scratch();
    let log = tmp.path().join("walk.csv");
    std::fs::copy(crate::support::field_log("walk.csv"), &log).unwrap();
    let candidates = tmp.path().join("spots.csv");
    std::fs::write(&candidates, "id,lat,lon\nBY-TOWER,45.104980,-122.414033\n").unwrap();
    let field = |name: &str| crate::support::field_log(name).display().to_string();
    let args = [
        "--structures".to_string(),
        field("structures.csv"),
        "--emitters".to_string(),
        field("emitters.csv"),
        "--candidates".to_string(),
        candidates.display().to_string(),
    ];
    let (_walk, page) = start(&log, &args);
    let (origin, token) = page.split_once("/?token=").unwrap();
    let agent = ureq::AgentBuilder::new()
        .timeout(std::time::Duration::from_secs(60))
        .build();
    let get = |path: &str| {
        crate::browser::http(
            agent.get(&format!(
                "{origin}{path}{}token={token}",
                if path.contains('?') { "&" } else { "?" }
            )),
            None,
        )
    };
    let (status, body) = get("/state");
    assert_eq!(status, 200, "{body}");
    let state: serde_json::Value = serde_json::from_str(&body).unwrap();
    let next = &state["next"];
    assert_eq!(next["name"], "BY-TOWER", "{next}");
    let caution = &next["cautions"][0];
    assert_eq!(caution["id"], "OLD-TWR", "{next}");
    assert_eq!(caution["reach_m"], 46.0, "{next}");
    assert_eq!(caution["rule"], "height", "{next}");
    assert!(
        next["walk"]["from"].as_str().unwrap().starts_with("#8 "),
        "{next}"
    );
    assert_eq!(state["last"]["name"], next["walk"]["from"], "{state}");

    let (status, svg) = get("/map?lat=45.1040&lon=-122.4150&acc=8");
    assert_eq!(status, 200, "{svg}");
    assert!(
        svg.contains("you are here") && svg.contains("#8 10:22"),
        "{svg}"
    );
    for bad in [
        "lat=91&lon=0",
        "lat=45.1",
        "lat=45.1&lon=-122.4&acc=-1",
        "lat=x&lon=1",
    ] {
        assert_eq!(get(&format!("/map?{bad}")).0, 422, "{bad}");
    }
    assert_eq!(
        get("/map?lat=0&lon=0").0,
        404,
        "a position far from the fix"
    );
    let (status, body) = get("/toward?lat=45.1040&lon=-122.4150");
    assert_eq!(status, 200, "{body}");
    let toward: serde_json::Value = serde_json::from_str(&body).unwrap();
    let d = toward["distance_m"].as_f64().unwrap();
    assert!((50.0..300.0).contains(&d), "{toward}");
}
