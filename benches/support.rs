//! The benchmarks' crate; the benchmarks are the `[[bench]]` targets beside
//! this file, each with its own description.
