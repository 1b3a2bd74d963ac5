//! Shared helpers for the hardware-free suites.

/// The number of cases for a property test: `default`, or the value of the
/// `PROPTEST_CASES` environment variable when it is set (for longer runs:
/// `PROPTEST_CASES=2000 cargo test -p ampwright-tests`).
pub fn cases(default: u32) -> u32 {
    std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// A fresh, empty folder under the system's temporary folder for one test.
pub fn temp_dir(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("ampwright-test-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap_or_else(|e| panic!("cannot create {}: {e}", d.display()));
    d
}

/// Scenario text with the lines that start with each key replaced by its
/// text, or dropped when the text is empty.
pub fn edited(text: &str, edits: &[(&str, &str)]) -> String {
    text.lines()
        .filter_map(|l| match edits.iter().find(|(k, _)| l.starts_with(k)) {
            Some((_, "")) => None,
            Some((_, w)) => Some(w.to_string()),
            None => Some(l.to_string()),
        })
        .collect::<Vec<_>>()
        .join("\n")
}
