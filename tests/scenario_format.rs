//! The scenario format reference (`host-sim/SCENARIO_FORMAT.md`) and the parser
//! agree: for every section, the fields the reference lists are exactly the
//! fields the parser names when it refuses an unknown one. And the parser's
//! messages speak the user's terms, never Rust's.

use std::collections::{BTreeMap, BTreeSet};

use host_sim::scenario::Params;

const REFERENCE: &str = include_str!("../host-sim/SCENARIO_FORMAT.md");
const TEMPLATE: &str = include_str!("../host-sim/scenarios/carousel_step.toml");

/// Section (as its TOML header, "" for the top level) -> the fields listed.
fn reference_fields() -> BTreeMap<String, BTreeSet<String>> {
    let mut out: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut section: Option<String> = None;
    for line in REFERENCE.lines() {
        if line.starts_with('#') {
            section = if line.contains("Top level") {
                Some(String::new())
            } else {
                line.split('`')
                    .nth(1)
                    .map(|h| h.trim_matches(|c| c == '[' || c == ']').to_string())
            };
            continue;
        }
        if let (Some(s), Some(rest)) = (&section, line.strip_prefix("| `"))
            && let Some(field) = rest.split('`').next()
        {
            out.entry(s.clone()).or_default().insert(field.to_string());
        }
    }
    out
}

/// The fields the parser accepts in a section: from its refusal of an
/// unknown one ("expected one of `a`, `b`" or "expected `a` or `b`").
fn parser_fields(section: &str) -> BTreeSet<String> {
    // The end of the template's header line for this section, if it has one.
    let header_end = |header: &str| -> Option<usize> {
        let mut offset = 0;
        for line in TEMPLATE.split_inclusive('\n') {
            if let Some(rest) = line.strip_prefix(header)
                && (rest.starts_with(' ') || rest.starts_with('\n'))
            {
                return Some(offset + line.len());
            }
            offset += line.len();
        }
        None
    };
    let text = if section.is_empty() {
        format!("zz_unknown = 1\n{TEMPLATE}")
    } else if let Some(at) =
        header_end(&format!("[{section}]")).or_else(|| header_end(&format!("[[{section}]]")))
    {
        format!("{}zz_unknown = 1\n{}", &TEMPLATE[..at], &TEMPLATE[at..])
    } else if ["load", "faults"].contains(&section) {
        format!("{TEMPLATE}\n[[{section}]]\nzz_unknown = 1\n")
    } else {
        format!("{TEMPLATE}\n[{section}]\nzz_unknown = 1\n")
    };
    let e = Params::from_toml(&text, "t").unwrap_err().to_string();
    assert!(e.contains("unknown field `zz_unknown`"), "[{section}]: {e}");
    let listed = e.split("expected").nth(1).unwrap_or_default();
    let listed = listed.split(';').next().unwrap_or_default();
    listed.split('`').skip(1).step_by(2).map(str::to_string).collect()
}

#[test]
fn the_reference_lists_exactly_the_fields_the_parser_accepts() {
    let reference = reference_fields();
    assert!(reference.len() >= 15, "{:?}", reference.keys());
    for (section, fields) in &reference {
        let parsed = parser_fields(section);
        // Sub-tables appear as fields of their parent in the parser's list.
        let subtables: BTreeSet<String> = reference
            .keys()
            .filter_map(|k| {
                let parent = k.rsplit_once('.').map_or("", |(p, _)| p);
                let leaf = k.rsplit('.').next().unwrap();
                (parent == section && !k.is_empty()).then(|| leaf.to_string())
            })
            .collect();
        let mut expected = fields.clone();
        expected.extend(subtables);
        assert_eq!(parsed, expected, "[{section}]");
    }
}

#[test]
fn parser_messages_have_no_rust_in_them() {
    for (key, bad) in [
        ("resistance_ohm", "\"abc\""),
        ("adc_bits", "-3"),
        ("mode", "5"),
        ("mode", "\"fast\""),
        ("trip_class", "10"),
        ("locked_rotor", "1"),
    ] {
        let text = TEMPLATE
            .lines()
            .map(|l| {
                if l.starts_with(&format!("{key} =")) {
                    format!("{key} = {bad}")
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n");
        let e = Params::from_toml(&text, "t").unwrap_err().to_string();
        for rust in [
            "f64",
            "u8",
            "u16",
            "u64",
            "variant",
            "wanted string or table",
            "invalid type",
            "bool",
        ] {
            assert!(!e.contains(rust), "{key} = {bad}: {e}");
        }
        assert!(e.contains("host-sim/SCENARIO_FORMAT.md"), "{e}");
    }
    // A missing field names its section.
    let text: String = TEMPLATE
        .lines()
        .filter(|l| !l.starts_with("shunt_ohm"))
        .collect::<Vec<_>>()
        .join("\n");
    let e = Params::from_toml(&text, "t").unwrap_err().to_string();
    assert!(e.contains("missing field `shunt_ohm` in [sense]"), "{e}");
}

fn error_of(extra: &str, edits: &[(&str, &str)]) -> String {
    let mut text = ampwright_tests::edited(TEMPLATE, edits);
    text.push_str(extra);
    Params::from_toml(&text, "t").unwrap_err().to_string()
}

#[test]
fn inputs_that_would_be_ignored_or_absurd_are_refused_in_words() {
    /// Text appended, lines replaced, the error's start.
    type Case<'a> = (&'a str, &'a [(&'a str, &'a str)], &'a str);
    let cases: [Case; 7] = [
        (
            "\n[[events]]\nat_s = 0.5\naction = \"disable\"\n",
            &[],
            "events[3].at_s = 0.5 must be within the run (duration_s = 0.02 s)",
        ),
        (
            "\n[[faults]]\nkind = \"sensor_open\"\nstart_s = 1e-3\nsupply_v = 12.0\n",
            &[],
            "faults[0].supply_v = 12 must be left out for kind sensor_open",
        ),
        (
            "\n[[faults]]\nkind = \"sensor_open\"\nstart_s = 1.0\n",
            &[],
            "faults[0].start_s = 1 must be within the run",
        ),
        (
            "",
            &[(
                "feedforward_back_emf_v_s_per_rad",
                "feedforward_back_emf_v_s_per_rad = 0.031",
            )],
            "controller.feedforward_back_emf_v_s_per_rad = 0.031 must be 0 unless speed_feedback = true",
        ),
        (
            "\n[[load]]\nat_s = 1e-3\ntorque_n_m = 1e12\n",
            &[],
            "load[0].torque_n_m = 1e12 must be between -10000 and 10000",
        ),
        (
            "",
            &[("duration_s", "duration_s = 1e300")],
            "duration_s = 1e300 must be between 1e-9 and 1e6",
        ),
        (
            "",
            &[("supply_v = 24.0", "supply_v = 1e9")],
            "bridge.supply_v = 1e9 must be between 0.001 and 10000",
        ),
    ];
    for (extra, edits, expected) in cases {
        let e = error_of(extra, edits);
        assert!(e.starts_with(expected), "expected {expected:?}, got {e:?}");
    }
}

#[test]
fn edges_on_the_averaged_bridge_is_bad_input() {
    let dir = ampwright_tests::temp_dir("edges-averaged");
    let path = dir.join("s.toml");
    std::fs::write(
        &path,
        TEMPLATE.replace("mode = \"switching\"", "mode = \"averaged\""),
    )
    .unwrap();
    let args = [
        "ampwright",
        "simulate",
        path.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
        "--edges",
        "--quiet",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 2);
}
