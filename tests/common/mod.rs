//! Helpers shared by the binary's integration tests: the real binary, and a
//! throw-away folder per test.

use std::path::PathBuf;
use std::process::Command;

/// The `loadloom` binary this test run built.
pub fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_loadloom"))
}

/// An empty folder of this test's own, `loadloom-{suite}-{name}-{pid}`.
pub fn scratch(suite: &str, name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("loadloom-{suite}-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}
