//! Prints the population method's figures: for each simulator preset and plans of 2 and 3 set-points, a
//! characterisation lot of 30 units and a production lot on other seeds, fitted from the plan's set-points
//! against the population and validated at random temperatures against the noise-only limit.
//!
//! `cargo run --release -p logtrim-host --example population_figures [SEED]` (the seed of the lots; the
//! README's figures are seed 1000).
use logtrim_host::frontend::preset;
use logtrim_host::population::trial::{run, TrialOptions};

fn main() {
    let seed: u64 = std::env::args().nth(1).and_then(|s| s.parse().ok()).unwrap_or(1000);
    println!(
        "{:<24} {:>3} {:>24} {:>6} {:>8} {:>8} {:>6} {:>9} {:>7}",
        "preset", "N", "set-points °C", "modes", "rms x", "max x", "worst", "outliers", "flagged"
    );
    for name in ["photometer-compensated", "gas-uncompensated"] {
        let fe = preset(name).expect("preset");
        for n in [3, 2] {
            let opt = TrialOptions {
                lot_seed: seed,
                lot_units: 30,
                production_seed: seed + 1,
                production_units: 20,
                outliers: 2,
                setpoints: n,
                validation: 3000,
                ..TrialOptions::default()
            };
            match run(&fe, &opt) {
                Ok(t) => {
                    let sp: Vec<String> = t.plan.setpoints_c.iter().map(|v| format!("{v:.1}")).collect();
                    let worst = t
                        .units
                        .iter()
                        .filter(|u| !u.outlier)
                        .filter_map(|u| u.versus_oracle.map(|v| v.0))
                        .fold(0.0, f64::max);
                    let flagged_in = t.units.iter().filter(|u| !u.outlier && u.flagged).count();
                    let flagged_out = t.units.iter().filter(|u| u.outlier && u.flagged).count();
                    println!(
                        "{:<24} {:>3} {:>24} {:>6} {:>7.2}x {:>7.2}x {:>5.2}x {:>4}/{:<4} {:>3} in",
                        name,
                        n,
                        sp.join(", "),
                        t.model.modes_kept,
                        t.pooled.0,
                        t.pooled.1,
                        worst,
                        flagged_out,
                        opt.outliers,
                        flagged_in
                    );
                    for u in &t.units {
                        eprintln!(
                            "  {} outlier={} {} flagged={} {:?} d2={:?} {}",
                            u.serial,
                            u.outlier,
                            u.verdict,
                            u.flagged,
                            u.versus_oracle,
                            u.population.as_ref().map(|p| (p.distance2, p.threshold)),
                            u.reasons
                        );
                    }
                    eprintln!("{}", t.model.render_summary());
                    eprintln!("{}", logtrim_host::population::plan::render(&t.plan));
                }
                Err(e) => println!("{name:<24} {n:>3} error: {e}"),
            }
        }
    }
}
