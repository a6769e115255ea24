//! The simulator's aged units: the model's equation, what ageing changes and what it leaves alone (the
//! chamber run), the field runs and their files.

use logtrim_host::frontend::{preset, Aging, FrontEnd};
use logtrim_host::simulate::{
    blank_ratio, chamber_run, field_temp_c, simulate, standard_ratios, validation_run, ChamberPlan, Plan,
    FIELD_READINGS, STANDARDS_PER_UNIT,
};

fn aged() -> (FrontEnd, FrontEnd) {
    let fe = preset("photometer-compensated").unwrap();
    let a = fe.aged(Aging { output_offset_v: 3e-3, gain_factor: 1.008 });
    (fe, a)
}

#[test]
fn ageing_scales_the_output_stage_and_adds_an_offset_at_its_output() {
    let (fe, a) = aged();
    for t in [0.0, 25.0, 70.0] {
        for x in [-6.0, -1.0, 0.0, 2.5, 4.5] {
            // V_out = k·G(T)·ΔV + V_shift + δV, with ΔV the pair's output (untouched by ageing).
            let want = 1.008 * fe.gain(t) * fe.pair_voltage(x, t) + fe.output_stage.level_shift_v + 3e-3;
            let got = a.output_voltage(x, t);
            assert!((got - want).abs() <= 1e-15 * want.abs().max(1.0), "{x} at {t}: {got} vs {want}");
            assert_eq!(a.pair_voltage(x, t), fe.pair_voltage(x, t));
            // The code slope is the derivative of the aged code (central difference, h = 1e-4).
            let h = 1e-4;
            let fd = (a.code_exact(x + h, t) - a.code_exact(x - h, t)) / (2.0 * h);
            assert!((a.code_slope(x, t) - fd).abs() <= 1e-6 * fd, "slope at {x}, {t}");
            // The oracle inverts the aged model.
            let back = a.invert_code(a.code_exact(x, t), t).unwrap();
            assert!((back - x).abs() < 1e-9, "{x} at {t}: {back}");
        }
    }
    // Ageing does not bend the curve: the sensitivity is the unaged unit's.
    assert!((a.sensitivity(-5.0, 60.0) - fe.sensitivity(-5.0, 60.0)).abs() < 1e-12);
    assert_eq!(a.as_calibrated(), fe);
}

#[test]
fn the_chamber_run_sees_the_unit_as_calibrated_and_the_rest_sees_it_aged() {
    let (fe, a) = aged();
    let plan = ChamberPlan { setpoints: 3, ratios_per_setpoint: 7, repeats: 1 };
    assert_eq!(chamber_run(&a, &plan, 0, 5), chamber_run(&fe, &plan, 0, 5));
    let (va, vf) = (validation_run(&a, 50, 0, 1, 5), validation_run(&fe, 50, 0, 1, 5));
    // Same draws of (x, T), different codes: +3 mV is about 3e-3/(2.5/65536) ≈ 79 codes at ratio 1.
    for (ra, rf) in va.iter().zip(&vf) {
        assert_eq!((ra.x_true, ra.t_true_c), (rf.x_true, rf.t_true_c));
        assert_ne!(ra.code, rf.code);
    }
    let lsb = a.lsb_v() / (1.0 + a.adc.gain_error);
    let d = a.code_exact(0.0, 25.0) - fe.code_exact(0.0, 25.0);
    let want = (0.008 * fe.gain(25.0) * fe.pair_voltage(0.0, 25.0) + 3e-3) / lsb;
    assert!((d - want).abs() < 1e-6, "{d} vs {want} codes");
}

#[test]
fn aged_simulations_write_standards_and_blank_runs() {
    let (fe, a) = aged();
    let plan = Plan {
        seed: 9,
        chamber: ChamberPlan { setpoints: 2, ratios_per_setpoint: 3, repeats: 1 },
        validation_count: 10,
        units: 1,
    };
    let sim = simulate(&a, &plan).unwrap();
    assert_eq!(sim.standards.len(), STANDARDS_PER_UNIT * FIELD_READINGS);
    assert_eq!(sim.blank.len(), FIELD_READINGS);
    let ratios = standard_ratios(&a);
    assert!(sim.standards.iter().all(|r| ratios.contains(&r.ratio)));
    assert!(sim.blank.iter().all(|r| r.ratio == blank_ratio(&a) && r.ratio == 1.0));
    // The standards sit at a quarter and three quarters of ln(1e-3)…ln(1e2).
    let (lo, hi) = (1e-3f64.ln(), 1e2f64.ln());
    assert!((ratios[0].ln() - (lo + 0.25 * (hi - lo))).abs() < 1e-12);
    assert!((ratios[1].ln() - (lo + 0.75 * (hi - lo))).abs() < 1e-12);
    assert_eq!(field_temp_c(&a), 25.0);
    let mean_t = sim.standards.iter().map(|r| r.t_true_c).sum::<f64>() / sim.standards.len() as f64;
    assert!((mean_t - 25.0).abs() < 0.1);
    let text = String::from_utf8(sim.standards_csv()).unwrap();
    assert!(text.starts_with("code,temp_c,ratio\n"), "{text}");
    assert_eq!(text.lines().count(), 1 + 32);
    assert!(String::from_utf8(sim.blank_csv()).unwrap().starts_with("code,temp_c\n"));
    let dir = std::env::temp_dir().join(format!("logtrim-fieldsim-{}", std::process::id()));
    let written = sim.write_to(&dir).unwrap();
    let names: Vec<String> =
        written.iter().map(|w| w.path.file_name().unwrap().to_string_lossy().into_owned()).collect();
    assert!(names.contains(&"standards.csv".into()) && names.contains(&"blank.csv".into()), "{names:?}");
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["aging"]["gain_factor"], 1.008);
    assert_eq!(manifest["rows"]["standards"], 32);
    std::fs::remove_dir_all(&dir).unwrap();
    // An unaged unit writes neither, and its description has no aging key.
    let sim = simulate(&fe, &plan).unwrap();
    assert!(sim.standards.is_empty() && sim.blank.is_empty());
    assert!(!fe.to_json().contains("aging"));
}

#[test]
fn ageing_descriptions_round_trip_and_bad_ones_are_refused() {
    let (_, a) = aged();
    let back = FrontEnd::from_json(&a.to_json(), "mem").unwrap();
    assert_eq!(back, a);
    for (offset, gain, field) in [(0.0, 3.0, "aging.gain_factor"), (f64::NAN, 1.0, "aging.output_offset_v")] {
        let mut bad = a.clone();
        bad.aging = Some(Aging { output_offset_v: offset, gain_factor: gain });
        let e = bad.validate().unwrap_err().to_string();
        assert!(e.contains(field), "{e}");
    }
    let typo = a.to_json().replace("gain_factor", "gain_factr");
    assert!(FrontEnd::from_json(&typo, "mem").is_err());
}
