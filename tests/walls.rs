//! The walls of the house (DEVELOPERS.md, "Walls"), checked on the source: no
//! import circle between the top-level modules of either crate, the one-way
//! rules between `scenario/`, `tuning/` and the plant, the command line free
//! of control math, and no file in host-sim/src much over 500 lines.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

fn rust_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(rust_files(&p));
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
    out.sort();
    out
}

/// The top-level module a file belongs to (`plant` for `src/plant/motor.rs`,
/// `prepare` for `src/prepare.rs`).
fn module_of(src: &Path, file: &Path) -> String {
    let rel = file.strip_prefix(src).unwrap();
    let first = rel
        .components()
        .next()
        .unwrap()
        .as_os_str()
        .to_string_lossy()
        .into_owned();
    first.trim_end_matches(".rs").to_string()
}

/// The source without its `#[cfg(test)]` module (tests may reach further).
fn without_tests(text: &str) -> &str {
    text.find("#[cfg(test)]\nmod tests").map_or(text, |k| &text[..k])
}

/// `crate::x` paths named in a file's code (not its comments), as top-level
/// module names.
fn crate_refs(text: &str) -> BTreeSet<String> {
    let code: String = text
        .lines()
        .filter(|l| !l.trim_start().starts_with("//"))
        .collect::<Vec<_>>()
        .join("\n");
    let text = code.as_str();
    let mut out = BTreeSet::new();
    for (k, _) in text.match_indices("crate::") {
        if k > 0 && text.as_bytes()[k - 1].is_ascii_alphanumeric() {
            continue; // e.g. `pi_core::` is not ours; `host_sim_crate::`
        }
        let rest = &text[k + "crate::".len()..];
        let name: String = rest
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
            .collect();
        if !name.is_empty() && name.chars().next().is_some_and(|c| c.is_ascii_lowercase()) {
            out.insert(name);
        }
    }
    out
}

fn graph(src: &Path) -> BTreeMap<String, BTreeSet<String>> {
    let mut g: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for f in rust_files(src) {
        let m = module_of(src, &f);
        if m == "lib" || m == "main" || m == "bin" {
            continue;
        }
        // A module's test file (`x/tests.rs`, `x/*_tests.rs`) is its
        // `#[cfg(test)]` module kept beside it: tests may reach further.
        let name = f.file_name().unwrap().to_string_lossy();
        if f.parent() != Some(src) && (name == "tests.rs" || name.ends_with("_tests.rs")) {
            continue;
        }
        let text = std::fs::read_to_string(&f).unwrap();
        let refs = crate_refs(without_tests(&text));
        let e = g.entry(m.clone()).or_default();
        e.extend(refs.into_iter().filter(|r| *r != m));
    }
    g
}

/// A circle in the graph, if any, as the list of modules around it.
fn circle(g: &BTreeMap<String, BTreeSet<String>>) -> Option<Vec<String>> {
    fn visit(
        g: &BTreeMap<String, BTreeSet<String>>,
        n: &str,
        path: &mut Vec<String>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(k) = path.iter().position(|p| p == n) {
            let mut c = path[k..].to_vec();
            c.push(n.to_string());
            return Some(c);
        }
        if done.contains(n) {
            return None;
        }
        path.push(n.to_string());
        for next in g.get(n).into_iter().flatten() {
            if let Some(c) = visit(g, next, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(n.to_string());
        None
    }
    let mut done = BTreeSet::new();
    for n in g.keys() {
        if let Some(c) = visit(g, n, &mut Vec::new(), &mut done) {
            return Some(c);
        }
    }
    None
}

#[test]
fn no_import_circle_in_either_crate() {
    for krate in ["pi-core/src", "host-sim/src"] {
        let g = graph(&root().join(krate));
        assert!(g.len() > 5, "{krate}: {g:?}");
        if let Some(c) = circle(&g) {
            panic!("{krate}: import circle {}", c.join(" -> "));
        }
    }
}

#[test]
fn the_leaves_of_pi_core_import_nothing_above_them() {
    let g = graph(&root().join("pi-core/src"));
    let leaves = ["error", "num", "fault"];
    for leaf in leaves {
        let above: Vec<_> = g[leaf].iter().filter(|m| !leaves.contains(&m.as_str())).collect();
        assert!(above.is_empty(), "{leaf} imports {above:?}");
    }
}

#[test]
fn the_host_walls_hold() {
    let g = graph(&root().join("host-sim/src"));
    let forbid = |from: &str, to: &[&str]| {
        for t in to {
            assert!(!g[from].contains(*t), "{from} must not import {t}: {:?}", g[from]);
        }
    };
    forbid("scenario", &["tuning", "prepare", "cli"]);
    forbid("tuning", &["scenario", "prepare", "cli"]);
    forbid(
        "plant",
        &["cli", "scenario", "results", "plot", "tuning", "prepare", "sim"],
    );
    forbid("results", &["cli", "plot", "prepare", "tuning"]);
    forbid("bench", &["cli", "plot", "results", "prepare", "bringup"]);
    // The board commands' work: no printing, no pictures.
    forbid("bringup", &["cli", "plot"]);
    // The sweep computes; the command line reads and writes its files.
    forbid("sweep", &["cli", "plot"]);
    for f in rust_files(&root().join("host-sim/src/sweep")) {
        let text = std::fs::read_to_string(&f).unwrap();
        assert!(!text.contains("std::fs"), "{} does file I/O", f.display());
    }
    // The command line parses, calls and prints: no control math of its own.
    for f in rust_files(&root().join("host-sim/src/cli")) {
        let text = std::fs::read_to_string(&f).unwrap();
        for word in ["analysis::", "OpenLoop", "predict_step", "margins("] {
            assert!(!text.contains(word), "{} uses {word}", f.display());
        }
    }
}

#[test]
fn no_host_file_is_over_500_lines() {
    for f in rust_files(&root().join("host-sim/src")) {
        let n = std::fs::read_to_string(&f).unwrap().lines().count();
        assert!(n <= 500, "{} has {n} lines", f.display());
    }
}
