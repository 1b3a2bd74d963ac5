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
