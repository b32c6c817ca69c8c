//! Helpers shared by the test groups that run the binary as a user would.

use assert_cmd::cargo::cargo_bin_cmd;
use std::path::Path;

/// Run `edgetherm ARGS`: the exit status, stdout and stderr.
pub fn run(args: &[&str]) -> (Option<i32>, String, String) {
    let o = cargo_bin_cmd!("edgetherm").args(args).output().unwrap();
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// A path as a command-line argument.
pub fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}
