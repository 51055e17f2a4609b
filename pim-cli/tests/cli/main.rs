//! End-to-end runs of the `pim` binary: every command on the invented demo site, the
//! bad-input catalogue with its exact messages and exit codes, and the field log under
//! concurrent and killed writers. One test executable; a module per command.

mod browser;
mod catalogue;
mod evidence;
mod explain;
mod fieldlog;
mod fix;
mod harden;
mod invariants;
mod labels;
mod licence;
mod log_files;
mod memory;
mod one_truth;
mod plan;
mod ranking;
mod recording;
mod slope;
mod suggested;
mod sweep;
mod ticket;
mod ticket_phone;
mod vocabulary;
mod walk_page;
mod walk_phone;
mod walk_server;
mod walk_tls;

/// Running the binary under test, and the shared helpers of the `pim-tests` crate.
mod support {
    use std::path::{Path, PathBuf};
    use std::process::{Command, Output};

    pub use pim_tests::{assert_xml_well_formed, field_log, workspace_root, Rng};

    /// The `pim` binary cargo built for these tests.
    pub fn pim_bin() -> PathBuf {
        PathBuf::from(env!("CARGO_BIN_EXE_pim"))
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

    /// Runs `pim` with `args` from the workspace root, which must succeed, and reads its
    /// standard output as JSON.
    pub fn pim_json(args: &[&str]) -> serde_json::Value {
        let o = pim(args);
        assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
        serde_json::from_str(&stdout_of(&o))
            .unwrap_or_else(|e| panic!("{args:?}: not JSON ({e}): {}", stdout_of(&o)))
    }

    /// Says that a test is skipped and why where the test runner shows it: written to
    /// the process's standard error directly, which the runner does not capture (it
    /// captures only `eprintln!`, and shows that only for a failing test).
    pub fn say_skipped(why: &str) {
        use std::io::Write;
        let _ = writeln!(std::io::stderr(), "skipped: {why}");
    }

    /// A fresh scratch directory, removed when the value is dropped.
    pub fn scratch() -> tempfile::TempDir {
        tempfile::Builder::new()
            .prefix("pim-test-")
            .tempdir()
            .unwrap_or_else(|e| panic!("cannot make a scratch directory: {e}"))
    }
}
