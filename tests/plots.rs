//! The pictures, parsed: every legend entry names something drawn and every
//! drawn series is in the legend; no two texts overlap (boxes estimated the
//! way the canvas places them); the step plot's ticks include the levels the
//! steps go to and its two axes share their zero.

use std::collections::BTreeSet;

use host_sim::plot::svg::{overlaps, text_width};
use host_sim::plot::{
    LoadPlot, StepPlot, frequency_response_svg, load_run_svg, long_run_svg, root_locus_svg, step_response_svg,
};
use host_sim::prepare::{self, Overrides};
use host_sim::results::report;
use host_sim::scenario::Params;

const DEMO: &str = include_str!("../host-sim/scenarios/carousel_step.toml");
const JAM: &str = include_str!("../host-sim/scenarios/carousel_jam.toml");

/// The value of `name="..."` inside one element's text.
fn attr<'a>(element: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let start = element.find(&key)? + key.len();
    element[start..].split('"').next()
}

/// Each element (`<tag ...>`) with its text content when it is a `<text>`.
fn elements(svg: &str) -> Vec<(String, Option<String>)> {
    let mut out = Vec::new();
    let mut rest = svg;
    while let Some(k) = rest.find('<') {
        rest = &rest[k..];
        let end = rest.find('>').unwrap();
        let el = rest[..=end].to_string();
        rest = &rest[end + 1..];
        let text = if el.starts_with("<text") {
            let close = rest.find("</text>").unwrap();
            let t = rest[..close].to_string();
            rest = &rest[close..];
            Some(t.replace("&amp;", "&").replace("&lt;", "<").replace("&gt;", ">"))
        } else {
            None
        };
        out.push((el, text));
    }
    out
}

fn check(name: &str, svg: &str) {
    let els = elements(svg);
    let series: BTreeSet<&str> = els.iter().filter_map(|(e, _)| attr(e, "data-series")).collect();
    let legend: BTreeSet<&str> = els.iter().filter_map(|(e, _)| attr(e, "data-legend")).collect();
    assert!(!series.is_empty(), "{name}: nothing drawn");
    assert_eq!(series, legend, "{name}: drawn series and legend entries");
    let mut boxes = Vec::new();
    for (e, t) in &els {
        let Some(t) = t else { continue };
        if e.contains("transform=") || t.is_empty() {
            continue; // the rotated axis titles stand alone at the sides
        }
        let x: f64 = attr(e, "x").unwrap().parse().unwrap();
        let y: f64 = attr(e, "y").unwrap().parse().unwrap();
        let size: f64 = attr(e, "font-size").unwrap().parse().unwrap();
        let w = text_width(t.chars().count(), size);
        let x0 = match attr(e, "text-anchor") {
            Some("middle") => x - w / 2.0,
            Some("end") => x - w,
            _ => x,
        };
        let b = (x0, y - size, x0 + w, y + 0.25 * size);
        for (other, ob) in &boxes {
            assert!(!overlaps(*ob, b), "{name}: {t:?} overlaps {other:?}");
        }
        boxes.push((t.clone(), b));
    }
}

#[test]
fn the_step_response_is_consistent_and_its_axes_share_their_zero() {
    let s = Params::from_toml(DEMO, "t").unwrap().build().unwrap();
    let (trace, rep) = report::run(&s, None, &mut |_| {}).unwrap();
    let svg = step_response_svg(&trace, &StepPlot::of(&s, &rep));
    check("step response", &svg);
    let ticks: Vec<f64> = elements(&svg)
        .iter()
        .filter_map(|(e, _)| attr(e, "data-tick-y"))
        .map(|v| v.parse().unwrap())
        .collect();
    for level in [0.0, 1.5, -1.0] {
        assert!(ticks.contains(&level), "{level} not among {ticks:?}");
    }
    // The same zero: the "0" labels of both y axes (not the time axis's,
    // which is centred under its tick) on one line.
    let zeros: Vec<f64> = elements(&svg)
        .iter()
        .filter(|(e, t)| t.as_deref() == Some("0") && attr(e, "text-anchor") != Some("middle"))
        .map(|(e, _)| attr(e, "y").unwrap().parse().unwrap())
        .collect();
    assert!(
        zeros.len() >= 2 && zeros.iter().all(|y| (y - zeros[0]).abs() < 0.5),
        "{zeros:?}"
    );
}

#[test]
fn the_long_run_picture_is_consistent_and_marks_the_trip() {
    let short = JAM
        .lines()
        .map(|l| {
            if l.starts_with("duration_s") {
                "duration_s = 2.0".to_string()
            } else if l.starts_with("trip_class") {
                "thermal_time_constant_s = 1.0".to_string()
            } else if l.starts_with("trip_after_s") || l.starts_with("trip_before_s") {
                String::new()
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    let s = Params::from_toml(&short, "t").unwrap().build().unwrap();
    let (trace, rep) = report::run(&s, None, &mut |_| {}).unwrap();
    let (what, t) = rep.first_fault.clone().unwrap();
    let svg = long_run_svg("jam", &trace, Some((&what, t)));
    check("long run", &svg);
    assert!(svg.contains("first fault") && svg.contains("trip level"));
}

#[test]
fn the_load_pictures_are_consistent_and_mark_the_charge() {
    for (file, panels) in [
        ("battery_charge.toml", 3),
        ("solenoid_stroke.toml", 3),
        ("led_string_dimming.toml", 2),
    ] {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("../host-sim/scenarios")
            .join(file);
        let s = host_sim::Scenario::load(&path).unwrap();
        let (trace, rep) = report::run(&s, None, &mut |_| {}).unwrap();
        assert_eq!(trace.readouts.len() + 1, panels, "{file}");
        let svg = load_run_svg(&trace, &LoadPlot::of(&rep, &trace));
        check(file, &svg);
        for r in trace.readouts {
            assert!(
                svg.contains(&format!("{} ({})", r.name, r.unit)),
                "{file}: {}",
                r.name
            );
        }
        if rep.charge.is_some() {
            for words in ["constant voltage", "charge ended", "charge voltage 4.200 V"] {
                assert!(svg.contains(words), "{file}: {words}");
            }
        }
    }
}

#[test]
fn the_design_pictures_are_consistent() {
    let params = Params::from_toml(DEMO, "t").unwrap();
    let r = prepare::design(&params, &Overrides::default()).unwrap();
    let p = r.survey.pictures(true).unwrap();
    let locus = root_locus_svg("locus", &p.locus, Some(p.desired));
    check("root locus", &locus);
    assert!(
        locus.contains("unstable beyond this Kp"),
        "the crossing is marked"
    );
    let others: Vec<(&str, &[host_sim::tuning::locus::BodePoint])> =
        p.others.iter().map(|(n, v)| (*n, v.as_slice())).collect();
    assert_eq!(others.len(), 3, "every other method overlaid");
    let bode = frequency_response_svg("bode", (p.method, &p.bode), &p.margins, &others);
    check("frequency response", &bode);
    assert!(bode.contains("gain margin") && bode.contains("phase margin"));
}

#[test]
fn the_report_pages_are_self_contained_with_their_pictures_inline() {
    let dir = ampwright_tests::temp_dir("report-pages");
    let demo =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let out = dir.to_str().unwrap();
    for (command, file) in [
        ("simulate", "carousel-step-report.html"),
        ("design", "carousel-step-design-report.html"),
    ] {
        let args = [
            "ampwright",
            command,
            demo.to_str().unwrap(),
            "--out",
            out,
            "--report",
            "--quiet",
        ];
        let args: Vec<&str> = args
            .into_iter()
            .filter(|a| command == "simulate" || *a != "--quiet")
            .collect();
        assert_eq!(
            host_sim::cli::main(args.into_iter().map(Into::into)),
            0,
            "{command}"
        );
        let html = std::fs::read_to_string(dir.join(file)).unwrap();
        assert!(html.starts_with("<!DOCTYPE html>") && html.trim_end().ends_with("</html>"));
        let pictures = html.matches("<svg").count();
        assert!(
            pictures >= if command == "design" { 2 } else { 1 },
            "{command}: {pictures}"
        );
        for outside in ["<script", "<link", "<img", "url(", "@import", "src="] {
            assert!(!html.contains(outside), "{command}: {outside}");
        }
    }
}

#[test]
fn the_capture_pictures_are_consistent() {
    let dir = ampwright_tests::temp_dir("capture-pictures");
    let captures = std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/captures");
    let csv = captures.join("valve_coil_bench.csv");
    let run = |args: &[&str]| {
        let mut all = vec!["ampwright", args[0], csv.to_str().unwrap()];
        all.extend(&args[1..]);
        all.extend(["--out", dir.to_str().unwrap()]);
        host_sim::cli::main(all.iter().map(Into::into))
    };
    assert_eq!(run(&["identify"]), 0);
    assert_eq!(
        run(&[
            "compare",
            captures.join("valve_coil_datasheet.toml").to_str().unwrap()
        ]),
        0
    );
    for file in ["valve_coil_bench-fit.svg", "valve_coil_bench-compare.svg"] {
        check(file, &std::fs::read_to_string(dir.join(file)).unwrap());
    }
}

#[test]
fn the_sweep_pictures_are_consistent() {
    let dir = ampwright_tests::temp_dir("sweep-pictures");
    let scenario =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let args = [
        "ampwright",
        "sweep",
        scenario.to_str().unwrap(),
        "--runs",
        "40",
        "--corners",
        "half",
        "--quiet",
        "--out",
        dir.to_str().unwrap(),
    ];
    assert_eq!(host_sim::cli::main(args.iter().map(Into::into)), 0);
    for file in [
        "carousel-step-sweep-histograms.svg",
        "carousel-step-sweep-scatter.svg",
    ] {
        check(file, &std::fs::read_to_string(dir.join(file)).unwrap());
    }
}
