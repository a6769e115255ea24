//! `logtrim characterise`, `plan` and `fit --population` end to end: the README's walk-through run as
//! written, and bad input refused with a specific message.

mod common;

use common::{logtrim, logtrim_in, scratch, stdout};

/// The `$ logtrim …` commands of the README's population section, in order.
fn walk_through() -> Vec<String> {
    let readme = include_str!("../../../README.md");
    let start = readme.find("## Half the chamber time").expect("the README's population section");
    let section = &readme[start..];
    let end = section[3..].find("\n## ").map_or(section.len(), |i| i + 3);
    section[..end].lines().filter_map(|l| l.strip_prefix("$ logtrim ")).map(str::to_string).collect()
}

#[test]
fn the_readme_walk_through_runs_as_written() {
    let d = scratch("population-walk");
    let steps = walk_through();
    let verbs: Vec<&str> = steps.iter().filter_map(|s| s.split_whitespace().next()).collect();
    assert_eq!(verbs, ["simulate", "characterise", "plan", "simulate", "fit"], "{steps:?}");
    let mut outputs = Vec::new();
    for step in &steps {
        let args: Vec<&str> = step.split_whitespace().collect();
        let out = logtrim_in(&args, &d);
        let code = common::code(&out);
        let (o, e) = (stdout(&out), common::stderr(&out));
        // Every step runs; `fit` exits 3 when a unit fails acceptance, as the walk-through shows.
        let fit = args[0] == "fit";
        assert!(code == 0 || (fit && code == 3), "logtrim {step}: exit {code}\n{o}{e}");
        outputs.push(o);
    }
    assert!(outputs[1].contains("modes kept") && d.join("pop.json").is_file());
    // The plan's set-points are the ones the walk-through's production run uses.
    let plan = &outputs[2];
    let temps = plan.lines().find_map(|l| l.strip_prefix("set-points: ")).unwrap();
    let temps: Vec<&str> = temps.split(" °C").next().unwrap().split(", ").collect();
    assert!(steps[3].contains(&format!("--setpoints-at {}", temps.join(","))), "{plan}\n{}", steps[3]);
    // Every production unit was fitted and judged, with the population check among its checks.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("units/summary.json")).unwrap()).unwrap();
    let units = summary.as_array().or_else(|| summary["units"].as_array()).unwrap();
    assert_eq!(units.len(), 8);
    // The simulator's ground truth: which units were drawn from outside the population.
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("line/units.json")).unwrap()).unwrap();
    let outliers: Vec<&str> = truth["units"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|u| u["outlier"] == true)
        .map(|u| u["serial"].as_str().unwrap())
        .collect();
    assert_eq!(outliers.len(), 1, "{truth}");
    for u in units {
        assert_ne!(u["verdict"], "ERROR", "{u}");
        let checks = u["checks"].as_array().unwrap();
        let population = checks.iter().find(|c| c["name"] == "population_distance").expect("the check");
        // The unit drawn from outside is flagged by the population check; the others pass it.
        let outside = outliers.contains(&u["serial"].as_str().unwrap());
        assert_eq!(population["passed"], !outside, "{u}");
    }
    // A unit's calibration file is an ordinary one, over the population's temperature range.
    let unit: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("units/U0001.json")).unwrap()).unwrap();
    assert_eq!(unit["format"], "logtrim-calibration");
    assert!(unit["calibration"]["temperature"]["min_c"].as_f64().unwrap() < -20.0);
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn bad_input_is_refused_with_a_specific_message() {
    let d = scratch("population-bad");
    let p = |name: &str| d.join(name).to_str().unwrap().to_string();
    // A lot of 3 units cannot make a population: exit 1, saying how many are needed.
    let (code, _, _) = logtrim(&[
        "simulate",
        "--preset",
        "photometer-compensated",
        "--units",
        "3",
        "--setpoints",
        "4",
        "--ratios",
        "9",
        "--repeats",
        "1",
        "--validation",
        "1",
        "--out-dir",
        &p("lot"),
    ]);
    assert_eq!(code, 0);
    let (code, _, err) = logtrim(&["characterise", &p("lot/cal.csv"), "-o", &p("pop.json")]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("at least 5"), "{err}");
    assert!(!d.join("pop.json").exists());
    // A population file with an unknown key: exit 2, naming the file and the key.
    std::fs::write(d.join("bad.json"), r#"{"format":"logtrim-population","version":1,"modes_kep":0}"#)
        .unwrap();
    let (code, _, err) = logtrim(&["plan", &p("bad.json")]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("bad.json") && err.contains("modes_kep"), "{err}");
    let (code, _, err) =
        logtrim(&["fit", &p("lot/cal.csv"), "--population", &p("bad.json"), "-o", &p("out")]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("bad.json"), "{err}");
    // --population with --model: refused by the parser.
    let (code, _, err) = logtrim(&[
        "fit",
        &p("lot/cal.csv"),
        "--population",
        &p("bad.json"),
        "--model",
        "offset=2",
        "-o",
        &p("out"),
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--model") && err.contains("--population"), "{err}");
    // A set-point outside the range, a temperature that is not a number, more outliers than units.
    let sim = |extra: &[&str]| {
        let mut a = vec!["simulate", "--preset", "photometer-compensated", "--out-dir"];
        let out = p("x");
        a.push(&out);
        a.extend_from_slice(extra);
        logtrim(&a)
    };
    let (code, _, err) = sim(&["--setpoints-at", "0,90"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("set-point 90") && err.contains("2 K beyond"), "{err}");
    let (code, _, err) = sim(&["--setpoints-at", "0,warm"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--setpoints-at") && err.contains("warm"), "{err}");
    let (code, _, err) = sim(&["--units", "2", "--outliers", "3"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("outliers = 3"), "{err}");
    assert!(!d.join("x").exists());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn a_lot_with_a_raw_thermistor_channel_is_characterised_and_fitted_with_its_sensor_file() {
    let d = scratch("population-raw");
    let p = |name: &str| d.join(name).to_str().unwrap().to_string();
    let sim = |units: &str, at: &[&str], seed: &str, out: &str| {
        let mut args = vec!["simulate", "--preset", "photometer-ntc", "--units", units];
        args.extend_from_slice(at);
        args.extend_from_slice(&["--ratios", "9", "--repeats", "1", "--validation", "1", "--seed", seed]);
        let out = p(out);
        args.extend_from_slice(&["--out-dir", &out]);
        let (code, _, err) = logtrim(&args);
        assert_eq!(code, 0, "{err}");
    };
    sim("8", &["--setpoints", "5"], "5", "lot");
    // The sensor file is the design's own temperature channel.
    let design: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("lot/frontend.json")).unwrap()).unwrap();
    std::fs::write(d.join("ntc.json"), design["temperature_sensor"]["sensor"].to_string()).unwrap();
    // Without the sensor file the temp_code column cannot be read: refused, naming the column.
    let (code, _, err) = logtrim(&["characterise", &p("lot/cal.csv"), "-o", &p("pop.json")]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("temp_code") && err.contains("cal.csv"), "{err}");
    assert!(!d.join("pop.json").exists());
    let (code, out, err) =
        logtrim(&["characterise", &p("lot/cal.csv"), "--sensor", &p("ntc.json"), "-o", &p("pop.json")]);
    assert_eq!(code, 0, "{out}{err}");
    sim("3", &["--setpoints-at", "0,35,70"], "6", "line");
    let (code, out, err) = logtrim(&[
        "fit",
        &p("line/cal.csv"),
        "--population",
        &p("pop.json"),
        "--sensor",
        &p("ntc.json"),
        "-o",
        &p("units"),
    ]);
    assert!(code == 0 || code == 3, "{out}{err}");
    // Each unit was judged with the population check, and its calibration file carries the sensor.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("units/summary.json")).unwrap()).unwrap();
    let units = summary.as_array().or_else(|| summary["units"].as_array()).unwrap();
    assert_eq!(units.len(), 3);
    for u in units {
        assert_ne!(u["verdict"], "ERROR", "{u}");
        assert!(u["checks"].as_array().unwrap().iter().any(|c| c["name"] == "population_distance"), "{u}");
    }
    let unit: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("units/U0001.json")).unwrap()).unwrap();
    assert!(unit["temperature_sensor"].is_object(), "{unit}");
    let _ = std::fs::remove_dir_all(&d);
}
