//! Running a reference library in python3 (moocore, SALib: installed in CI from
//! `.ci/requirements.txt`).
//!
//! A cross-check whose library is missing fails, naming the package, unless the developer
//! opts out explicitly with `STRIA_SKIP_PYTHON_REFS=1` (documented in DEVELOPERS.md); CI never
//! sets it.

use std::io::Write;
use std::process::{Command, Stdio};

/// The environment variable that lets a developer without the python libraries skip the
/// cross-checks.
pub const SKIP_VAR: &str = "STRIA_SKIP_PYTHON_REFS";

/// Run `script` with `input` on its standard input and return its standard output, or
/// `None` when python3 or `package` is unavailable and the developer opted out.
/// Panics (failing the test) when the library is missing and there is no opt-out, or when
/// the script fails for another reason.
pub fn run(package: &str, script: &str, input: &str) -> Option<String> {
    let probe = Command::new("python3")
        .arg("-c")
        .arg(format!("import {package}"))
        .output();
    let available = matches!(&probe, Ok(o) if o.status.success());
    if !available {
        if std::env::var_os(SKIP_VAR).is_some_and(|v| v == "1") {
            println!("note: {SKIP_VAR}=1: the {package} cross-check is skipped");
            return None;
        }
        panic!(
            "python3 cannot import {package} (pip install -r .ci/requirements.txt installs it); \
             set {SKIP_VAR}=1 to skip this cross-check on a machine without it"
        );
    }
    let mut child = Command::new("python3")
        .arg("-c")
        .arg(script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("python3 starts");
    child
        .stdin
        .take()
        .expect("stdin")
        .write_all(input.as_bytes())
        .expect("python3 reads its input");
    let out = child.wait_with_output().expect("python3 finishes");
    assert!(
        out.status.success(),
        "the {package} script failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(String::from_utf8(out.stdout).expect("utf-8 output"))
}
