//! The fit report: a snapshot of its Markdown for a fixed fit outcome (a change in the page is a visible
//! diff), its structure, and the files it writes (the page links charts that exist and parse as SVG).

mod common;

use common::units;
use logtrim::Calibration;
use logtrim_host::calfile::CalFile;
use logtrim_host::error_scale::ErrorScale;
use logtrim_host::fit::model::{Norm, Params, Spec};
use logtrim_host::fit::select::CvRecord;
use logtrim_host::fit::{FitData, FitOptions, FitOutcome, SetPointStats};
use logtrim_host::report::{ChartLink, FitReport};

fn spec(offset: usize, slope: usize, bulk: usize, bias: bool) -> Spec {
    Spec {
        offset_terms: offset,
        slope_terms: slope,
        bulk_terms: bulk,
        pole: true,
        bias,
        residual_x: 0,
        residual_t: 0,
    }
}

/// A fixed outcome: the figures are invented, so the snapshot depends on the page, not on the fitter.
fn outcome(cal: Calibration) -> FitOutcome {
    let chosen = spec(3, 2, 1, true);
    let sp = |t: f64, rows, refused, rms: f64, max: f64| SetPointStats {
        temp_c: t,
        rows,
        refused,
        set_aside: 0,
        noise_np: 2.0e-4,
        residual_ratio: 1.0,
        rms_np: rms,
        max_np: max,
    };
    FitOutcome {
        calibration: cal,
        params: Params::zero(chosen),
        norm: Norm {
            level: 30000.0,
            t_center_c: 32.5,
            t_half_span_k: 52.5,
            t_ref_k: 305.65,
            x_center: -1.15,
            x_half_span: 5.75,
        },
        chosen,
        setpoints: vec![
            sp(-20.02, 123, 0, 2.11e-4, 6.02e-4),
            sp(1.01, 123, 0, 1.98e-4, 5.5e-4),
            sp(22.0, 123, 0, 2.03e-4, 5.81e-4),
            sp(43.0, 123, 1, 2.2e-4, 7.1e-4),
            sp(64.0, 123, 2, 2.41e-4, 8.0e-4),
            sp(84.97, 123, 5, 3.02e-4, 1.12e-3),
        ],
        cv: vec![
            CvRecord { spec: spec(2, 1, 0, false), rms: 4.1e-3, max: 2.2e-2, folds: 4, chosen: false },
            CvRecord { spec: spec(3, 1, 0, false), rms: 1.9e-3, max: 9.5e-3, folds: 4, chosen: false },
            CvRecord { spec: spec(3, 2, 1, true), rms: 2.6e-4, max: 9.9e-4, folds: 4, chosen: true },
        ],
        noise_floor_np: Some(1.95e-4),
        cv_noise_np: Some(1.9e-4),
        notes: vec!["an invented note for the snapshot".into()],
        screening: Default::default(),
        population: None,
    }
}

/// Rows of an invented chamber run of the calibration's own model (noise-free codes, rounded).
fn data(cal: &Calibration) -> FitData {
    let mut d = FitData::default();
    for t in [-20.0, 1.0, 22.0, 43.0, 64.0, 85.0] {
        for k in 0..21 {
            let x = -6.9 + 11.5 * f64::from(k) / 20.0;
            d.code.push(cal.forward_code_f64(x, t).round() as u32);
            d.temp_c.push(t);
            d.ratio.push(x.exp());
        }
    }
    d
}

fn calfile(cal: Calibration) -> CalFile {
    let mut f = CalFile::new(cal, Some("GD-0417".into()));
    f.created_unix_s = 1_700_000_000; // 2023-11-14T22:13:20Z
    f
}

/// The invented unit's file, fit outcome and data, for a report.
struct Fixture {
    file: CalFile,
    outcome: FitOutcome,
    data: FitData,
    options: FitOptions,
}

impl Fixture {
    fn bent() -> Self {
        let cal = units::fitted_shape();
        Fixture {
            file: calfile(cal),
            outcome: outcome(cal),
            data: data(&cal),
            options: FitOptions::default(),
        }
    }

    /// The report of the fixture's fit from the chamber file `source`, in dB (power).
    fn report<'a>(&'a self, source: &'a str) -> FitReport<'a> {
        FitReport {
            calfile: &self.file,
            outcome: &self.outcome,
            data: &self.data,
            options: &self.options,
            source,
            unit: ErrorScale::DbPower,
        }
    }
}

#[test]
fn report_snapshot() {
    let fixture = Fixture::bent();
    let r = fixture.report("chamber/GD-0417.csv");
    let links = [ChartLink { title: "Error in x against x".into(), file: "GD-0417-error-vs-x.svg".into() }];
    insta::assert_snapshot!("fit_report", r.render_markdown(&links));
}

#[test]
fn report_structure() {
    let fixture = Fixture::bent();
    let r = fixture.report("cal.csv");
    let md = r.render_markdown(&[]);
    let headings: Vec<&str> = md.lines().filter(|l| l.starts_with('#')).collect();
    assert_eq!(
        headings,
        [
            "# Fit report: unit GD-0417",
            "## Model",
            "## Residuals per set-point",
            "## Cross-validation",
            "## Noise floor",
            "## Calibrated ranges",
            "## Charts",
            "## Notes"
        ]
    );
    // Every table row has as many cells as its header.
    let mut header_cells = 0;
    for l in md.lines() {
        if !l.starts_with('|') {
            header_cells = 0;
            continue;
        }
        let cells = l.matches('|').count() - 1;
        if header_cells == 0 {
            header_cells = cells;
        }
        assert_eq!(cells, header_cells, "row {l:?}");
    }
    // One row per set-point and per cross-validated size (the header, the rule, the rows).
    let section = |name: &str| md.split(name).nth(1).unwrap().split("\n## ").next().unwrap().to_string();
    assert_eq!(section("## Residuals per set-point").lines().filter(|l| l.starts_with('|')).count(), 2 + 6);
    assert_eq!(section("## Cross-validation").lines().filter(|l| l.starts_with('|')).count(), 2 + 3);
    // The dB column is 10·log10 of the neper figure: 2.110e-4 Np × 4.3429 = 9.164e-4 dB (ISO 80000-3).
    assert!(md.contains("| -20.02 | 123 | 0 | 2.110e-4 | 6.020e-4 | 9.164e-4 | 2.614e-3 |"), "{md}");
    assert!(md.contains("2023-11-14T22:13:20Z"));
    // An absorbance product's page: the same figures in mAU, 1000·log10(e) mAU per Np (A = −log10 T):
    // 2.110e-4 Np is 9.164e-2 mAU.
    let md = FitReport { unit: ErrorScale::MilliAbsorbance, ..r }.render_markdown(&[]);
    assert!(md.contains("| rms [Np] | max [Np] | rms [mAU] | max [mAU] |"), "{md}");
    assert!(md.contains("| -20.02 | 123 | 0 | 2.110e-4 | 6.020e-4 | 9.164e-2 | 2.614e-1 |"), "{md}");
}

#[test]
fn written_report_links_charts_that_exist() {
    let fixture = Fixture::bent();
    let dir = std::env::temp_dir().join(format!("logtrim-report-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let r = fixture.report("cal.csv");
    let files = r.write_to(&dir).unwrap();
    assert_eq!(files.len(), 3);
    assert!(files[0].ends_with("GD-0417-fit-report.md"));
    let md = std::fs::read_to_string(&files[0]).unwrap();
    let links: Vec<&str> = md
        .lines()
        .filter_map(|l| l.strip_prefix("- ["))
        .filter_map(|l| l.split("](").nth(1))
        .map(|l| l.trim_end_matches(')'))
        .collect();
    assert_eq!(links, ["GD-0417-error-vs-x.svg", "GD-0417-f32-error-map.svg"]);
    for l in links {
        let svg = std::fs::read_to_string(dir.join(l)).unwrap();
        roxmltree::Document::parse(&svg).expect("well-formed SVG");
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_set_point_just_below_zero_prints_without_a_sign() {
    // A chamber set-point at 0 °C whose mean reading is a hair below it: "-0.00 °C" before the tool had one
    // home for its figures.
    let mut f = Fixture::bent();
    f.outcome.setpoints[1].temp_c = -0.002;
    let md = f.report("chamber.csv").render_markdown(&[]);
    assert!(md.contains("| 0.00 | 123 |"), "{md}");
    let text = logtrim_host::fit::render_report(&f.outcome);
    let line = text.lines().find(|l| l.contains("0.00 °C")).unwrap_or_else(|| panic!("{text}"));
    assert!(line.trim_start().starts_with("0.00 °C"), "{line}");
    assert!(!md.contains("-0.00") && !text.contains("-0.00"), "{md}\n{text}");
}
