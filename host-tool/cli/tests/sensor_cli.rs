//! `logtrim sensor` end to end: coefficients from data-sheet points, tables, settings files, and the exit
//! codes and messages of bad input (nothing written when refused).

mod common;

use common::{logtrim, logtrim_words, scratch, NTC_CHANNEL};
use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::Placement;
use logtrim_checks::within;

/// The value after `name = ` on a line of the output.
fn printed(out: &str, name: &str) -> f64 {
    let line =
        out.lines().find(|l| l.trim_start().starts_with(name)).unwrap_or_else(|| panic!("{name}: {out}"));
    let v = line.split('=').nth(1).unwrap().split_whitespace().next().unwrap();
    v.parse().unwrap()
}

#[test]
fn steinhart_hart_and_beta_from_data_sheet_points() {
    // Three points of the Steinhart–Hart curve commonly quoted for a 10 kΩ NTC (A = 1.009249522e-3,
    // B = 2.378405444e-4, C = 2.019202697e-7; from memory), written out: T = 1/(A + B·L + C·L³).
    let (a, b, c) = (1.009_249_522e-3, 2.378_405_444e-4, 2.019_202_697e-7);
    let t = |r: f64| 1.0 / (a + b * r.ln() + c * r.ln().powi(3)) - 273.15;
    let pts: Vec<String> = [30_000.0, 10_000.0, 2_500.0].iter().map(|&r| format!("{}:{r}", t(r))).collect();
    let check = format!("{}:1000", t(1000.0));
    let (code, out, err) = logtrim(&[
        "sensor",
        "steinhart-hart",
        "--point",
        &pts[0],
        "--point",
        &pts[1],
        "--point",
        &pts[2],
        "--check",
        &check,
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(within(printed(&out, "A"), a, 0.0, 1e-6), "{out}");
    assert!(within(printed(&out, "B"), b, 0.0, 1e-6), "{out}");
    assert!(within(printed(&out, "C"), c, 0.0, 1e-5), "{out}");
    // The check point, beyond the three, lies on the fitted curve to a millikelvin.
    let line = out.lines().find(|l| l.trim_start().starts_with("check")).unwrap();
    let error_k: f64 = line.split_whitespace().last().unwrap().parse().unwrap();
    assert!(error_k.abs() < 1e-3, "{out}");
    // β between 25 and 85 °C by its definition, ln(R25/R85)/(1/T25 − 1/T85) (common practice).
    let r85 = 10_000.0 * (3900.0 * (1.0 / 358.15 - 1.0 / 298.15f64)).exp();
    let (code, out, err) = logtrim(&["sensor", "beta", "--point", "25:10k", "--point", &format!("85:{r85}")]);
    assert_eq!(code, 0, "{err}");
    assert!(within(printed(&out, "β"), 3900.0, 0.0, 1e-6), "{out}");
}

#[test]
fn rtd_table_to_a_csv_file_at_the_iec_60751_points() {
    let d = scratch("table");
    let f = d.join("pt100.csv");
    let line = "sensor table --rtd pt100 --from -200 --to 850 --step 50 --format csv -o";
    let (code, out, err) = logtrim_words(line, &[f.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("22 rows"), "{out}");
    let text = std::fs::read_to_string(&f).unwrap();
    let rows: Vec<(f64, f64)> = text
        .lines()
        .skip(1)
        .map(|l| {
            let mut it = l.split(',').map(|v| v.parse::<f64>().unwrap());
            (it.next().unwrap(), it.next().unwrap())
        })
        .collect();
    // IEC 60751:2008 Pt100 values (as given in the project's numerics guide, there marked "from memory").
    for (t, r) in [
        (-200.0, 18.5201),
        (-100.0, 60.2558),
        (-50.0, 80.3063),
        (100.0, 138.5055),
        (200.0, 175.8560),
        (400.0, 247.0920),
        (850.0, 390.4811),
    ] {
        let got = rows.iter().find(|row| row.0 == t).unwrap_or_else(|| panic!("{t}: {text}")).1;
        assert!(within(got, r, 1e-3, 0.0), "{t} °C: {got} Ω vs {r}");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn settings_file_round_trips_and_drives_a_table() {
    let d = scratch("settings");
    let f = d.join("sensor.json");
    let line = format!("sensor settings --point 25:10k --point 85:1.07k {NTC_CHANNEL} -o");
    let (code, out, err) = logtrim_words(&line, &[f.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("K per code"), "{out}");
    let s: TemperatureSensor = serde_json::from_str(&std::fs::read_to_string(&f).unwrap()).unwrap();
    assert_eq!(s.validate(), Ok(()));
    assert_eq!((s.min_c, s.max_c), (-40.0, 125.0));
    assert_eq!(
        (s.divider.placement, s.divider.series_ohm, s.divider.bits),
        (Placement::LowSide, 10_000.0, 12)
    );
    assert_eq!((s.divider.full_scale_code, s.divider.open_margin, s.divider.short_margin), (4096, 8, 8));
    let SensorElement::NtcBeta(b) = s.element else { panic!("{s:?}") };
    // β from the two points by its definition.
    let want = (10_000.0f64 / 1_070.0).ln() / (1.0 / 298.15 - 1.0 / 358.15);
    assert!(within(f64::from(b.beta_k), want, 0.0, 1e-6), "{b:?}");
    // Serialised again, the same text.
    let again = serde_json::to_string_pretty(&s).unwrap() + "\n";
    assert_eq!(again, std::fs::read_to_string(&f).unwrap());
    // The table of that file runs the firmware's conversion: 25 °C reads half scale (R = R_s, common
    // practice) and back as 25 °C within a code.
    let (code, out, err) =
        logtrim(&["sensor", "table", "--sensor", f.to_str().unwrap(), "--step", "5", "--format", "csv"]);
    assert_eq!(code, 0, "{err}");
    let row = out.lines().find(|l| l.starts_with("25,")).unwrap_or_else(|| panic!("{out}"));
    let cells: Vec<&str> = row.split(',').collect();
    assert_eq!(cells[3], "2048", "{row}");
    assert!(within(cells[4].parse::<f64>().unwrap(), 25.0, 0.03, 0.0), "{row}");
    assert_eq!(out.lines().count(), 1 + 34);
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn bad_input_exits_2_naming_the_option_and_writes_nothing() {
    let d = scratch("bad");
    let f = d.join("sensor.json");
    let out = f.to_str().unwrap();
    let divider =
        ["--series", "10k", "--placement", "low", "--bits", "12", "--min", "-40", "--max", "125", "-o", out];
    let cases: Vec<(Vec<&str>, Vec<&str>)> = vec![
        // Two equal temperatures.
        (
            vec!["--point", "25:10k", "--point", "25:9k", "--point", "50:3.6k"],
            vec!["--point 25:10000 and --point 25:9000", "distinct temperatures"],
        ),
        // A negative resistance.
        (vec!["--point", "25:-10k", "--point", "85:1k"], vec!["--point 25:-10000", "not positive", "> 0 Ω"]),
        // A curve that turns back between its points.
        (
            vec!["--point", "0:30k", "--point", "25:10k", "--point", "50:9k"],
            vec!["is monotone between 0 and 50 °C", "3579 K, 406 K"],
        ),
        // Resistance rising with temperature.
        (vec!["--point", "25:10k", "--point", "85:12k"], vec!["rises with temperature", "--rtd"]),
        // A Steinhart–Hart curve that turns back inside the valid range.
        (vec!["--sh", "1.2e-3,2.5e-4,-4e-7"], vec!["--min/--max", "not monotone"]),
        // A Beta model's option without the Beta model.
        (vec!["--rtd", "pt100", "--t0", "3"], vec!["--t0", "--beta"]),
    ];
    for (element, words) in cases {
        let mut args = vec!["sensor", "settings"];
        args.extend(element.iter());
        args.extend(divider.iter());
        let (code, _, err) = logtrim(&args);
        assert_eq!(code, 2, "{args:?}: {err}");
        for w in words {
            assert!(err.contains(w), "{args:?}: {w:?} not in {err}");
        }
        assert!(!f.exists(), "{args:?} wrote a file");
    }
    let settings = "sensor settings --placement low --bits 12";
    let line = format!("{settings} --beta 3900 --r0 10k --series -10k --min -40 --max 125 -o");
    let (code, _, err) = logtrim_words(&line, &[out]);
    assert_eq!(code, 2);
    assert!(err.contains("--series -10000") && err.contains("not positive"), "{err}");
    let line = "sensor settings --rtd pt1000 --series 1k --placement high --bits 12 --min -250 --max 100 -o";
    let (code, _, err) = logtrim_words(line, &[out]);
    assert_eq!(code, 2);
    assert!(err.contains("--min -250") && err.contains("−200 °C"), "{err}");
    // An end of the range inside a fault band.
    let line =
        format!("{settings} --beta 3900 --r0 10k --series 10k --open-margin 64 --min -80 --max 125 -o");
    let (code, _, err) = logtrim_words(&line, &[out]);
    assert_eq!(code, 2);
    assert!(err.contains("--min -80") && err.contains("open sensor"), "{err}");
    // Malformed values are refused by the option parser, with the option named.
    let (code, _, err) = logtrim(&["sensor", "beta", "--point", "25=10k", "--point", "85:1k"]);
    assert_eq!(code, 2);
    assert!(err.contains("--point") && err.contains("T:R"), "{err}");
    let (code, _, err) = logtrim(&["sensor", "table", "--rtd", "pt100", "--from", "0", "--to", "900"]);
    assert_eq!(code, 2);
    assert!(err.contains("--to 900") && err.contains("850"), "{err}");
    let (code, _, err) = logtrim(&["sensor", "table", "--from", "0", "--to", "10"]);
    assert_eq!(code, 2);
    assert!(err.contains("no element"), "{err}");
    assert!(!f.exists());
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn a_figure_that_rounds_to_zero_prints_without_a_sign() {
    // The curve through three points meets them to within rounding: its errors there are ±1e-13 K or so,
    // which printed with five decimals read "-0.00000" before the tool had one home for its figures.
    let (code, out, err) = logtrim(&[
        "sensor",
        "steinhart-hart",
        "--point",
        "0:32650",
        "--point",
        "25:10000",
        "--point",
        "85:1070",
    ]);
    assert_eq!(code, 0, "{err}");
    let given: Vec<&str> = out.lines().filter(|l| l.trim_start().starts_with("given")).collect();
    assert_eq!(given.len(), 3, "{out}");
    for line in given {
        assert!(line.ends_with(" 0.00000"), "{line}");
    }
    for word in out.split_whitespace() {
        let digits = word.strip_prefix('-').unwrap_or("");
        let zero = digits.starts_with('0') && digits.chars().all(|c| c == '0' || c == '.');
        assert!(!zero, "{word:?} in:\n{out}");
    }
}
