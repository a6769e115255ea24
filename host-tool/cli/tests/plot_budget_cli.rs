//! `logtrim plot` and `logtrim budget` end to end: files written, exit codes, errors on bad input.

mod common;

use std::path::{Path, PathBuf};

use common::{logtrim, logtrim_words, scratch, write_preset};
use logtrim_host::calfile::CalFile;
use logtrim_host::demo::fit_data;
use logtrim_host::fit::{self, FitOptions};
use logtrim_host::frontend::preset;
use logtrim_host::simulate::{self, ChamberPlan, Plan};

/// A simulated unit's files and its calibration, fitted with a fixed model (quick).
fn unit_files(dir: &Path) -> PathBuf {
    let fe = preset("photometer-compensated").unwrap();
    let chamber = ChamberPlan { setpoints: 4, ratios_per_setpoint: 13, repeats: 2 };
    let plan = Plan { seed: 11, chamber, validation_count: 400, ..Plan::default() };
    let mut sim = simulate::simulate(&fe, &plan).unwrap();
    // cal.csv's unit column names the unit whose calibration this is (plot picks its rows by serial).
    sim.units[0].serial = "PH-0042".into();
    sim.write_to(dir).unwrap();
    let d = fit_data(&sim.chamber, 0).unwrap();
    let spec = fit::model::Spec::parse("offset=3,slope=2,bulk=1,pole,bias").unwrap();
    let out = fit::fit(&d, &FitOptions { spec: Some(spec), ..FitOptions::default() }).unwrap();
    let coeffs = dir.join("COEFFS.json");
    CalFile::new(out.calibration, Some("PH-0042".into())).save(&coeffs).unwrap();
    coeffs
}

/// A scratch folder with a unit's files and calibration, and the folder for its charts.
fn plot_scratch(name: &str) -> (PathBuf, PathBuf, PathBuf) {
    let d = scratch(name);
    let coeffs = unit_files(&d);
    let out = d.join("charts");
    (d, coeffs, out)
}

#[test]
fn plot_writes_three_well_formed_charts() {
    let (d, coeffs, out) = plot_scratch("plot");
    let s = |p: &Path| p.to_str().unwrap().to_string();
    // plot with a validation run whose truth file is `truth`, into `out`, with `extra` options.
    let plot = |truth: &str, out: &Path, extra: &[&str]| {
        let (cal, readings, truth) = (s(&d.join("cal.csv")), s(&d.join("readings.csv")), s(&d.join(truth)));
        let (coeffs, out) = (s(&coeffs), s(out));
        let mut args = vec!["plot", &coeffs, &cal, "--validation", &readings, "--truth", &truth, "-o", &out];
        args.extend_from_slice(extra);
        logtrim(&args)
    };
    let (code, stdout, stderr) = plot("truth.csv", &out, &["--map-cells", "32x10"]);
    assert_eq!(code, 0, "{stdout}{stderr}");
    for name in ["PH-0042-error-vs-x.svg", "PH-0042-error-vs-temperature.svg", "PH-0042-f32-error-map.svg"] {
        let svg = std::fs::read_to_string(out.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(stdout.contains(name), "{stdout}");
    }
    assert_eq!(std::fs::read_dir(&out).unwrap().count(), 3, "nothing else, no temporary files");
    // An absorbance product reads its errors in mAU.
    let out_mau = d.join("charts-mau");
    let (code, stdout, stderr) = plot("truth.csv", &out_mau, &["--map-cells", "8x4", "--error-unit", "mau"]);
    assert_eq!(code, 0, "{stdout}{stderr}");
    let svg = std::fs::read_to_string(out_mau.join("PH-0042-error-vs-x.svg")).unwrap();
    assert!(svg.contains("mAU"), "the axis names the unit");

    // A truth file that lacks a reading: exit 2, the file and the id named, and no chart written.
    let truth = std::fs::read_to_string(d.join("truth.csv")).unwrap();
    let short: String = truth.lines().take(10).map(|l| format!("{l}\n")).collect();
    std::fs::write(d.join("short.csv"), short).unwrap();
    let out2 = d.join("charts2");
    let (code, _, stderr) = plot("short.csv", &out2, &[]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("reading id 10 has no row in") && stderr.contains("short.csv"), "{stderr}");
    assert!(!out2.exists(), "no half-written output");

    // --validation without --truth is a usage error.
    let (code, _, stderr) =
        logtrim(&["plot", &s(&coeffs), &s(&d.join("cal.csv")), "--validation", "r.csv", "-o", &s(&out2)]);
    assert_eq!(code, 2, "{stderr}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn plot_draws_the_fixed_point_error_map_on_request() {
    let (d, coeffs, out) = plot_scratch("plot-fixed");
    let s = |p: &Path| p.to_str().unwrap().to_string();
    let base = ["plot".to_string(), s(&coeffs), s(&d.join("cal.csv")), "-o".into(), s(&out)];
    let args = |extra: &[&str]| -> Vec<String> {
        base.iter().cloned().chain(extra.iter().map(|a| a.to_string())).collect()
    };
    let run = |a: Vec<String>| logtrim(&a.iter().map(String::as_str).collect::<Vec<_>>());
    let (code, stdout, stderr) = run(args(&["--map-cells", "24x8", "--fixed-map", "--map-codes", "4"]));
    assert_eq!(code, 0, "{stdout}{stderr}");
    let name = "PH-0042-fixed-error-map.svg";
    assert!(stdout.contains(name), "{stdout}");
    let svg = std::fs::read_to_string(out.join(name)).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let text: String = doc.descendants().filter(|n| n.is_text()).filter_map(|n| n.text()).collect();
    assert!(text.contains("fixed-point correction against the f64 reference"), "{text}");
    assert!(text.contains("error of fixed point [LSB]"), "{text}");
    let dims = |text: &str| -> (u32, u32) {
        let at = text.find("tables ").expect("table sizes in the chart") + "tables ".len();
        let rest = &text[at..];
        let end = rest.find(" knots").expect("knots");
        let (t, x) = rest[..end].split_once('×').expect("t×x");
        (t.parse().unwrap(), x.parse().unwrap())
    };
    assert!(text.contains(" knots; worst of 4 codes per cell"), "{text}");
    let (t_knots, _) = dims(&text);
    assert!(t_knots > 8, "{text}");
    // Without the flag there is no such file; table sizes reach the map.
    std::fs::remove_dir_all(&out).unwrap();
    let (code, _, stderr) = run(args(&["--map-cells", "24x8"]));
    assert_eq!(code, 0, "{stderr}");
    assert!(!out.join(name).exists());
    let (code, _, stderr) = run(args(&["--map-cells", "24x8", "--fixed-map", "--t-knots", "8"]));
    assert_eq!(code, 0, "{stderr}");
    // At most 8 knots over temperature: the power-of-two step grows until it needs no more.
    let svg = std::fs::read_to_string(out.join(name)).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let text: String = doc.descendants().filter(|n| n.is_text()).filter_map(|n| n.text()).collect();
    assert!(dims(&text).0 <= 8, "{text}");
    // Bad table sizes and a bad count of codes are errors of input, and nothing is written.
    std::fs::remove_dir_all(&out).unwrap();
    let (code, _, stderr) = run(args(&["--fixed-map", "--xa-knots", "1"]));
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("--xa-knots"), "{stderr}");
    assert!(!out.exists(), "no chart written when one of them fails");
    let (code, _, stderr) = run(args(&["--fixed-map", "--map-codes", "0"]));
    assert_eq!(code, 2, "{stderr}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn plot_draws_corrected_points_over_the_noise_floor_and_maps_against_the_bound() {
    // The demo's units: one whose temperature is a raw NTC channel, one whose sensor reads °C.
    let d = scratch("plot-floor");
    let (code, _, err) = logtrim(&["demo", "--out-dir", d.to_str().unwrap(), "--validation", "200"]);
    assert_eq!(code, 0, "{err}");
    for name in ["photometer-ntc", "photometer-compensated"] {
        let unit = d.join(name);
        let out = unit.join("charts");
        let arg = |f: &str| unit.join(f).to_str().unwrap().to_string();
        let (code, stdout, err) = logtrim(&[
            "plot",
            &arg("coeffs.json"),
            &arg("cal.csv"),
            "-o",
            &arg("charts"),
            "--map-cells",
            "24x8",
        ]);
        assert_eq!(code, 0, "{name}: {stdout}{err}");
        let file = |suffix: &str| {
            let f = std::fs::read_dir(&out)
                .unwrap()
                .map(|e| e.unwrap().path())
                .find(|p| p.file_name().unwrap().to_str().unwrap().ends_with(suffix));
            std::fs::read_to_string(f.unwrap_or_else(|| panic!("{name}: no *{suffix}"))).unwrap()
        };
        let svg = file("-error-vs-x.svg");
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let text: String = doc.descendants().filter_map(|n| n.text()).collect::<Vec<_>>().join("|");
        // The band's legend says where the floor comes from: the fit's own noise, in the chart's unit.
        let floor = CalFile::load(&unit.join("coeffs.json")).unwrap().fit.unwrap()["noise_floor_np"]
            .as_f64()
            .unwrap();
        assert!(floor > 0.0);
        assert!(
            text.contains("noise floor ±σ/√n: σ = ") && text.contains("mNp from the unit's repeats (fit)"),
            "{name}: {text}"
        );
        let bands = doc.descendants().filter(|n| n.has_tag_name("polygon")).count();
        assert_eq!(bands, 1, "{name}: one shaded band");
        let svg = file("-f32-error-map.svg");
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let said =
            doc.descendants().filter_map(|n| n.text()).any(|t| t.contains("% of verify's 0.25-LSB bound"));
        assert!(said, "{name}: the map's subtitle names the bound");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn budget_json_adds_up_and_bad_files_are_located() {
    let (code, stdout, stderr) = logtrim(&["budget", "--json", "--bits", "14", "--oversampling", "4"]);
    assert_eq!(code, 0, "{stderr}");
    let v: serde_json::Value = serde_json::from_str(&stdout).unwrap();
    assert_eq!(v["spec"]["adc"]["bits"], 14);
    assert!(v["generator"].as_str().unwrap().starts_with("logtrim "));
    let np: Vec<f64> =
        v["contributions"].as_array().unwrap().iter().map(|c| c["size"]["np"].as_f64().unwrap()).collect();
    assert_eq!(np.len(), 6);
    let rss = np.iter().map(|x| x * x).sum::<f64>().sqrt();
    assert!((v["rss"]["np"].as_f64().unwrap() - rss).abs() <= 1e-12 * rss);
    let sum: f64 = np.iter().sum();
    assert!((v["worst_case"]["np"].as_f64().unwrap() - sum).abs() <= 1e-12 * sum);

    let d = scratch("budget");
    let spec = d.join("design.json");
    write_preset("gas-uncompensated", &spec);
    let (code, table, _) = logtrim(&["budget", spec.to_str().unwrap()]);
    assert_eq!(code, 0);
    for want in [
        "quantisation",
        "ADC noise (N = 16)",
        "reference drift",
        "root-sum-square",
        "worst case (linear sum)",
        "[dB 10·log10]",
        "[dB 20·log10]",
        "[% ratio]",
    ] {
        assert!(table.contains(want), "{want:?} missing:\n{table}");
    }
    std::fs::write(&spec, "{\n  \"name\": \"x\",\n  \"adc\": { \"bits\": \"sixteen\" }\n}\n").unwrap();
    let (code, _, stderr) = logtrim(&["budget", spec.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(stderr.contains("design.json: line 3"), "{stderr}");
    // A figures file of an earlier version is named as such, with the options that take its figures now.
    std::fs::write(&spec, "{\"adc\": {\"bits\": 12}, \"reference\": {\"ratiometric_level_shift\": true}}")
        .unwrap();
    let (code, _, stderr) = logtrim(&["budget", spec.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(
        stderr.contains("the key `reference` is of a budget figures file")
            && stderr.contains("--oversampling"),
        "{stderr}"
    );
    let (code, _, stderr) = logtrim(&["budget", "--t-min", "80", "--t-max", "20"]);
    assert_eq!(code, 2);
    assert!(
        stderr.contains("temperature.max_c = 20: expected a temperature above temperature.min_c"),
        "{stderr}"
    );
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn budget_takes_the_design_that_simulate_reads() {
    let d = scratch("budget-design");
    let fe = d.join("fe.json");
    write_preset("photometer-compensated", &fe);
    let (code, from_file, stderr) = logtrim(&["budget", fe.to_str().unwrap(), "--json"]);
    assert_eq!(code, 0, "{stderr}");
    let (code, from_preset, _) = logtrim(&["budget", "--preset", "photometer-compensated", "--json"]);
    assert_eq!(code, 0);
    assert_eq!(from_file, from_preset, "the file written from a preset is that preset's design");
    // The figures are the design's: its converter, its operating range, its slope at 25 °C.
    let v: serde_json::Value = serde_json::from_str(&from_file).unwrap();
    let design: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&fe).unwrap()).unwrap();
    assert_eq!(v["spec"]["adc"]["bits"], design["adc"]["bits"]);
    assert_eq!(v["spec"]["adc"]["vref_v"], design["adc"]["vref_v"]);
    assert_eq!(v["spec"]["front_end"]["ratio_min"], design["operating"]["ratio_min"]);
    assert_eq!(v["spec"]["temperature"]["max_c"], design["operating"]["temp_max_c"]);
    let slope = v["spec"]["front_end"]["slope_v_per_decade"].as_f64().unwrap();
    // n·(kT/q)·G·ln 10 at 25 °C: 59.16 mV/decade × n × G (kT/q at 298.15 K, common practice).
    let (n, g) =
        (design["pair"]["ideality"].as_f64().unwrap(), design["output_stage"]["gain_25c"].as_f64().unwrap());
    assert!((slope - 0.05916 * n * g).abs() < 1e-4 * slope, "{slope}");
    // Options still override; the figures a description does not hold are options.
    let (code, table, _) = logtrim(&[
        "budget",
        fe.to_str().unwrap(),
        "--bits",
        "12",
        "--readings-averaged",
        "4",
        "--calibration-t",
        "30",
    ]);
    assert_eq!(code, 0);
    assert!(table.contains("12-bit ADC") && table.contains("(M = 4)"), "{table}");
    assert!(table.contains("reference drift counted from 30 °C"), "{table}");
    // The design is a file or a preset: one at a time.
    let (code, _, stderr) = logtrim(&["budget", fe.to_str().unwrap(), "--preset", "photometer-ntc"]);
    assert_eq!(code, 2, "{stderr}");
    // The old option of a hidden figure is gone.
    let (code, _, stderr) = logtrim(&["budget", "--ratiometric-level-shift"]);
    assert_eq!(code, 2, "{stderr}");
    let (code, _, stderr) = logtrim(&["budget", "--preset", "no-such-front-end"]);
    assert_eq!(code, 2);
    assert!(stderr.contains("no such preset"), "{stderr}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn budget_takes_the_sensor_file_the_other_verbs_read() {
    let d = scratch("budget-sensor");
    let sensor = d.join("ntc.json");
    let settings =
        "sensor settings --beta 3950 --r0 10k --series 10k --placement low --bits 12 --min -40 --max 125";
    let (code, _, err) = logtrim_words(settings, &["-o", sensor.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    let noise = |v: &serde_json::Value| v["spec"]["temperature"]["sensor_noise_k_rms"].as_f64().unwrap();
    // A digital design with the raw channel instead, and a raw-channel design with another channel.
    for name in ["photometer-compensated", "photometer-ntc"] {
        let (code, plain, err) = logtrim(&["budget", "--preset", name, "--json"]);
        assert_eq!(code, 0, "{err}");
        let (code, with, err) =
            logtrim(&["budget", "--preset", name, "--sensor", sensor.to_str().unwrap(), "--json"]);
        assert_eq!(code, 0, "{err}");
        let (plain, with): (serde_json::Value, serde_json::Value) =
            (serde_json::from_str(&plain).unwrap(), serde_json::from_str(&with).unwrap());
        // A 12-bit divider of a 10 kΩ NTC resolves well under 0.1 K per code over 0…70 °C (common practice,
        // from memory): its quantisation, √(1/12) code, is a few hundredths of a kelvin.
        assert!(noise(&with) > 0.005 && noise(&with) < 0.1, "{name}: {}", noise(&with));
        assert_ne!(noise(&with), noise(&plain), "{name}");
        // --sensor-noise still has the last word.
        let (code, over, _) = logtrim(&[
            "budget",
            "--preset",
            name,
            "--sensor",
            sensor.to_str().unwrap(),
            "--sensor-noise",
            "0.2",
            "--json",
        ]);
        assert_eq!(code, 0);
        assert_eq!(noise(&serde_json::from_str(&over).unwrap()), 0.2);
    }
    // A channel that does not read over the range is refused, with the file and the temperature.
    let (code, _, err) = logtrim(&[
        "budget",
        "--preset",
        "photometer-ntc",
        "--sensor",
        sensor.to_str().unwrap(),
        "--t-max",
        "200",
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("--sensor") && err.contains("ntc.json: the temperature channel at "), "{err}");
    let (code, _, err) = logtrim(&["budget", "--sensor", d.join("missing.json").to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("missing.json"), "{err}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn budget_gives_its_sizes_in_the_unit_the_product_speaks() {
    // A design with a raw NTC channel and one whose temperature arrives in °C: the same column.
    for name in ["photometer-ntc", "gas-uncompensated"] {
        let (code, plain, err) = logtrim(&["budget", "--preset", name]);
        assert_eq!(code, 0, "{err}");
        let (code, out, err) = logtrim(&["budget", "--preset", name, "--error-unit", "mau"]);
        assert_eq!(code, 0, "{err}");
        let head = out.lines().find(|l| l.starts_with("contribution")).unwrap();
        assert!(head.contains("[% ratio]         [mAU]  largest at"), "{head}");
        // Every row with a size: mAU = 1000·x/ln 10 (absorbance A = −log10 of the ratio, common practice),
        // which is 100 times the power decibels of the same error (10·x/ln 10).
        let mut rows = 0;
        for line in out.lines().skip_while(|l| !l.starts_with("contribution")).skip(1) {
            // The scientific figures of a row: Np, dB 10·log10, dB 20·log10, then the new column.
            let sci: Vec<f64> =
                line.split_whitespace().filter(|w| w.contains('e')).filter_map(|w| w.parse().ok()).collect();
            let [np, db10, _, mau] = sci[..] else { continue };
            assert!((mau - 100.0 * db10).abs() <= 1e-3 * mau, "{line}");
            assert!((mau - 1000.0 * np / std::f64::consts::LN_10).abs() <= 2e-3 * mau, "{line}");
            rows += 1;
        }
        assert!(rows >= 5, "{out}");
        // Without the option the table is the one it was.
        assert!(!plain.contains("[mAU]"), "{plain}");
    }
    let (code, _, err) = logtrim(&["budget", "--preset", "photometer-ntc", "--error-unit", "furlong"]);
    assert_eq!(code, 2);
    assert!(err.contains("mau"), "{err}");
    let (code, _, err) = logtrim(&["budget", "--preset", "photometer-ntc", "--error-unit", "mau", "--json"]);
    assert_eq!(code, 2, "{err}");
}
