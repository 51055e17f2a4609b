//! A headless Chromium driven over WebDriver (chromedriver, W3C WebDriver protocol, with
//! the DevTools protocol reached through chromedriver's `goog/cdp/execute`), at a
//! phone's size: what the browser tests of the walk page and of the ticket share.
//! `.ci/install-browser` installs both programs; a test skips where they are missing.

use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::{json, Value};

/// The phone the tests hold: 390 × 844 CSS pixels (a common handset held upright).
pub const PHONE_PX: (u32, u32) = (390, 844);

/// The element key of the W3C WebDriver protocol.
pub const ELEMENT: &str = "element-6066-11e4-a52e-4f735466cecf";

pub fn on_path(names: &[&str]) -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|dir| names.iter().map(move |n| dir.join(n)))
        .find(|p| p.is_file())
}

pub fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .and_then(|l| l.local_addr())
        .map(|a| a.port())
        .unwrap()
}

/// A child process ended when the test ends, even on failure.
pub struct Process(pub Child);

impl Drop for Process {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// The response body of an HTTP exchange, whatever its status.
pub fn http(req: ureq::Request, body: Option<&Value>) -> (u16, String) {
    let result = match body {
        Some(b) => req.send_json(b.clone()),
        None => req.call(),
    };
    match result {
        Ok(r) => (r.status(), r.into_string().unwrap_or_default()),
        Err(ureq::Error::Status(code, r)) => (code, r.into_string().unwrap_or_default()),
        Err(e) => panic!("HTTP request failed: {e}"),
    }
}

/// A WebDriver session on chromedriver.
pub struct Browser {
    base: String,
    pub agent: ureq::Agent,
    /// chromedriver, ended with the session.
    _driver: Process,
    /// The browser's profile, removed with the session.
    _profile: tempfile::TempDir,
}

impl Browser {
    pub fn call(&self, method: &str, path: &str, body: Option<Value>) -> Value {
        let url = format!("{}{path}", self.base);
        let (status, text) = http(self.agent.request(method, &url), body.as_ref());
        let v: Value = serde_json::from_str(&text).unwrap_or(Value::Null);
        assert!(status < 300, "WebDriver {method} {path}: {status} {text}");
        v["value"].clone()
    }

    pub fn cdp(&self, cmd: &str, params: Value) -> Value {
        self.call(
            "POST",
            "/goog/cdp/execute",
            Some(json!({"cmd": cmd, "params": params})),
        )
    }

    pub fn script(&self, script: &str) -> Value {
        self.call(
            "POST",
            "/execute/sync",
            Some(json!({"script": script, "args": []})),
        )
    }

    pub fn element(&self, css: &str) -> String {
        let v = self.call(
            "POST",
            "/element",
            Some(json!({"using": "css selector", "value": css})),
        );
        match v[ELEMENT].as_str() {
            Some(id) => id.to_string(),
            None => panic!("no element {css}: {v}"),
        }
    }

    pub fn click(&self, css: &str) {
        let id = self.element(css);
        self.call("POST", &format!("/element/{id}/click"), Some(json!({})));
    }

    pub fn type_into(&self, css: &str, text: &str) {
        let id = self.element(css);
        self.call("POST", &format!("/element/{id}/clear"), Some(json!({})));
        self.call(
            "POST",
            &format!("/element/{id}/value"),
            Some(json!({ "text": text })),
        );
    }

    pub fn value(&self, css: &str) -> String {
        self.script(&format!("return document.querySelector('{css}').value;"))
            .as_str()
            .unwrap_or_default()
            .to_string()
    }

    pub fn text(&self, css: &str) -> String {
        self.script(&format!(
            "var e = document.querySelector('{css}'); return e ? e.textContent : '';"
        ))
        .as_str()
        .unwrap_or_default()
        .to_string()
    }

    /// Waits until `script` returns true.
    pub fn wait_for(&self, script: &str, what: &str) {
        let start = Instant::now();
        while start.elapsed() < Duration::from_secs(20) {
            if self.script(script) == Value::Bool(true) {
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        panic!("timed out waiting for {what}");
    }

    pub fn screenshot(&self, to: &Path) {
        use base64::Engine;
        let v = self.call("GET", "/screenshot", None);
        let png = base64::engine::general_purpose::STANDARD
            .decode(v.as_str().unwrap())
            .unwrap();
        std::fs::write(to, png).unwrap();
    }
}

impl Browser {
    /// A new session of a headless Chromium emulating a phone of `size` CSS pixels (two
    /// device pixels to one, touch), or `None`, with the reason said, where Chromium or
    /// chromedriver is not installed.
    pub fn phone(size: (u32, u32)) -> Option<Browser> {
        Browser::phone_with(size, &[], false)
    }

    /// [`Browser::phone`] with more command-line arguments for Chromium, and with
    /// certificates a test server made itself accepted when `accept_insecure_certs`
    /// (the W3C WebDriver capability `acceptInsecureCerts`).
    pub fn phone_with(
        size: (u32, u32),
        extra_args: &[String],
        accept_insecure_certs: bool,
    ) -> Option<Browser> {
        let (Some(chrome), Some(driver)) = (
            on_path(&["chromium", "chromium-browser", "google-chrome"]),
            on_path(&["chromedriver"]),
        ) else {
            crate::support::say_skipped(
                "Chromium and chromedriver are not installed (run .ci/install-browser)",
            );
            return None;
        };
        let port = free_port();
        let driver = Process(
            Command::new(&driver)
                .arg(format!("--port={port}"))
                .stdout(Stdio::null())
                .stderr(Stdio::null())
                .spawn()
                .unwrap(),
        );
        let agent = ureq::AgentBuilder::new()
            .timeout(Duration::from_secs(60))
            .build();
        let driver_url = format!("http://127.0.0.1:{port}");
        let start = Instant::now();
        loop {
            if let Ok(r) = agent.get(&format!("{driver_url}/status")).call() {
                let v: Value = r.into_json().unwrap_or(Value::Null);
                if v["value"]["ready"] == Value::Bool(true) {
                    break;
                }
            }
            assert!(
                start.elapsed() < Duration::from_secs(30),
                "chromedriver did not start"
            );
            std::thread::sleep(Duration::from_millis(100));
        }
        let profile = tempfile::tempdir().unwrap();
        let mut args: Vec<String> = [
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ]
        .iter()
        .map(|a| a.to_string())
        .collect();
        args.push(format!("--user-data-dir={}", profile.path().display()));
        args.extend(extra_args.iter().cloned());
        let caps = json!({"capabilities": {"alwaysMatch": {
            "browserName": "chrome",
            "acceptInsecureCerts": accept_insecure_certs,
            "goog:chromeOptions": {
                "binary": chrome.display().to_string(),
                "args": args,
                "mobileEmulation": {"deviceMetrics": {"width": size.0, "height": size.1, "pixelRatio": 2.0, "touch": true}},
            }
        }}});
        let (status, text) = http(
            agent.request("POST", &format!("{driver_url}/session")),
            Some(&caps),
        );
        assert_eq!(status, 200, "new session: {text}");
        let session: Value = serde_json::from_str(&text).unwrap();
        let id = session["value"]["sessionId"].as_str().unwrap().to_string();
        Some(Browser {
            base: format!("{driver_url}/session/{id}"),
            agent,
            _driver: driver,
            _profile: profile,
        })
    }
}
/// What the page measures of itself: its scroll width, how many visible texts it
/// checked (HTML and SVG), and each one under the least size, with its size.
pub const MEASURE: &str = r#"
const least = arguments[0];
const out = { scrollWidth: document.documentElement.scrollWidth, html: 0, svg: 0, small: [] };
const walker = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
while (walker.nextNode()) {
  const node = walker.currentNode;
  const el = node.parentElement;
  if (!node.textContent.trim() || !el || el.closest('svg') || !el.checkVisibility()) continue;
  const range = document.createRange();
  range.selectNodeContents(node);
  const r = range.getBoundingClientRect();
  if (r.width === 0 || r.height === 0) continue;
  const px = parseFloat(getComputedStyle(el).fontSize);
  out.html += 1;
  if (px < least) out.small.push([node.textContent.trim().slice(0, 40), px]);
}
for (const t of document.querySelectorAll('svg text')) {
  if (!t.textContent.trim() || !t.checkVisibility()) continue;
  const b = t.getBoundingClientRect();
  if (b.width === 0 || b.height === 0) continue;
  const m = t.getScreenCTM();
  const px = parseFloat(getComputedStyle(t).fontSize) * Math.hypot(m.a, m.b);
  out.svg += 1;
  if (px < least) out.small.push([t.textContent.trim().slice(0, 40), px]);
}
return out;
"#;
