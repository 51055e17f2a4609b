//! The ticket on a phone (issue 26): the demo's ticket.html opened from its folder in a
//! headless Chromium at 390 × 844 CSS pixels never scrolls sideways
//! (`document.documentElement.scrollWidth` ≤ 390) and no visible text renders under
//! 12 px: HTML text by its computed font size, SVG text by its font size times the
//! picture's scale on the screen (`getScreenCTM`), so a picture shrunk to fit counts as
//! shrunk. 12 px is common practice for the least legible size on a handheld screen.
//! With `PIM_UPDATE_DOCS` set, screenshots of the top of the ticket and of its map go
//! into docs/ for the README. Skips where Chromium or chromedriver is not installed.

use serde_json::{json, Value};

use crate::browser::{Browser, MEASURE, PHONE_PX};
use crate::support::{pim_in, scratch, stderr_of, workspace_root};

#[test]
fn the_ticket_reads_on_a_phone() {
    let Some(browser) = Browser::phone(PHONE_PX) else {
        return;
    };
    let tmp = scratch();
    let o = pim_in(Some(tmp.path()), &["demo", "--out", "demo"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let page = tmp.path().join("demo/ticket.html");
    let url = format!("file://{}", page.display());
    browser.call("POST", "/url", Some(json!({ "url": url })));
    browser.wait_for(
        "return document.readyState === 'complete';",
        "the ticket to load",
    );

    let least = 12.0;
    let m = browser.call(
        "POST",
        "/execute/sync",
        Some(json!({"script": MEASURE, "args": [least]})),
    );
    eprintln!("measured at {PHONE_PX:?}: {m}");
    let width = m["scrollWidth"].as_f64().unwrap();
    assert!(width <= PHONE_PX.0 as f64, "the page is {width} px wide");
    // The three pictures' texts are among those checked, drawn for the phone.
    assert!(m["html"].as_u64().unwrap() > 100, "{m}");
    assert!(m["svg"].as_u64().unwrap() > 60, "{m}");
    assert_eq!(
        m["small"],
        Value::Array(vec![]),
        "texts under {least} px: {m}"
    );
    let phone_pictures = browser.script(
        "return [...document.querySelectorAll('.pic-phone svg')].filter(s => s.checkVisibility()).length;",
    );
    assert_eq!(phone_pictures, json!(3), "map, spectrum and trace");

    // The pictures for the README, taken only when asked.
    if std::env::var_os("PIM_UPDATE_DOCS").is_some() {
        let docs = workspace_root().join("docs");
        std::fs::create_dir_all(&docs).unwrap();
        browser.script("window.scrollTo(0, 0);");
        browser.screenshot(&docs.join("ticket-390x844.png"));
        let map = browser.script(
            "const f = [...document.querySelectorAll('figure')].find(f => f.querySelector('figcaption').textContent.startsWith('The walk')); f.scrollIntoView(true); return !!f;",
        );
        assert_eq!(map, json!(true));
        browser.screenshot(&docs.join("ticket-map-390x844.png"));
    }
}
