//! Shared helpers for the cross-checks against published sources and the end-to-end runs
//! of the `pim` binary. The checks themselves are in `tests/tests/`.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

/// The workspace root.
pub fn workspace_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("."))
}

/// A file of the invented demo scenario.
pub fn field_log(name: &str) -> PathBuf {
    workspace_root().join("field-logs").join(name)
}

/// A file of the bad-input catalogue.
pub fn bad_input(name: &str) -> PathBuf {
    workspace_root().join("tests").join("bad-inputs").join(name)
}

/// The `pim` binary of the profile these tests were built with, built first if needed
/// (`cargo build` is a no-op when it is fresh).
pub fn pim_bin() -> PathBuf {
    static BIN: OnceLock<PathBuf> = OnceLock::new();
    BIN.get_or_init(|| {
        let exe = std::env::current_exe().unwrap_or_default();
        let profile_dir = exe
            .parent()
            .and_then(Path::parent)
            .map(Path::to_path_buf)
            .unwrap_or_else(|| workspace_root().join("target").join("debug"));
        let release = profile_dir.file_name().is_some_and(|n| n == "release");
        let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".to_string());
        let mut cmd = Command::new(cargo);
        cmd.args(["build", "--quiet", "-p", "pim-cli", "--bin", "pim"])
            .current_dir(workspace_root());
        if release {
            cmd.arg("--release");
        }
        if let Some(target_dir) = profile_dir.parent() {
            cmd.env("CARGO_TARGET_DIR", target_dir);
        }
        let status = cmd
            .status()
            .unwrap_or_else(|e| panic!("cannot run cargo: {e}"));
        assert!(status.success(), "building pim failed");
        profile_dir.join(format!("pim{}", std::env::consts::EXE_SUFFIX))
    })
    .clone()
}

/// Runs `pim` with `args` in `dir` (the workspace root when `None`).
pub fn pim_in(dir: Option<&Path>, args: &[&str]) -> Output {
    let root = workspace_root();
    Command::new(pim_bin())
        .args(args)
        .current_dir(dir.unwrap_or(&root))
        .output()
        .unwrap_or_else(|e| panic!("cannot run pim: {e}"))
}

/// Runs `pim` with `args` from the workspace root.
pub fn pim(args: &[&str]) -> Output {
    pim_in(None, args)
}

/// Standard output as text.
pub fn stdout_of(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Standard error as text.
pub fn stderr_of(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// A small deterministic random source for Monte Carlo checks (SplitMix64, Box–Muller):
/// the same seed gives the same walks on every machine.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal.
    pub fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// Panics unless `text` is well-formed XML with balanced elements; `what` names it.
pub fn assert_xml_well_formed(text: &str, what: &str) {
    let mut reader = quick_xml::Reader::from_str(text);
    let mut depth = 0i32;
    loop {
        match reader.read_event() {
            Ok(quick_xml::events::Event::Start(_)) => depth += 1,
            Ok(quick_xml::events::Event::End(_)) => depth -= 1,
            Ok(quick_xml::events::Event::Eof) => break,
            Ok(_) => {}
            Err(e) => panic!("{what}: not XML: {e}"),
        }
    }
    assert_eq!(depth, 0, "{what}: unbalanced elements");
}
