//! The fit report: a Markdown page a test engineer files with the unit's record, and the charts it links.
//!
//! [`FitReport::render_markdown`] renders the page; with the feature `plot`, `FitReport::write_to` writes, into one directory, `<unit>-fit-report.md` and the charts it links
//! (`<unit>-error-vs-x.svg`: the error in x at each chamber set-point before and after correction, the
//! corrected points over the band of the fit's noise floor; `<unit>-f32-error-map.svg`: the f32 correction
//! against the f64 reference over code and temperature, on the scale of `verify`'s ¼-LSB bound, with the
//! worst error as a share of it).
//! Without a serial the prefix is `unit`. Every file is built in memory first and written atomically.
//!
//! The page holds the unit, the date of the calibration, the data it came from, the model chosen and how,
//! the per-set-point residuals (rows, refused, rms and max in Np and in the unit the user reads, by default
//! dB of power-like ratios), the cross-validation table, the noise floor, the calibrated ranges and links to
//! the charts (whose error axes are in the same unit).

use std::fmt::Write as _;
#[cfg(feature = "plot")]
use std::path::{Path, PathBuf};

use crate::calfile::CalFile;
use crate::error_scale::{db_power, ErrorScale};
use crate::fit::{FitData, FitOptions, FitOutcome};
use crate::output::number::Num;
#[cfg(feature = "plot")]
use crate::plot::{self, figures, PlotError};

/// A chart linked from the report.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ChartLink {
    /// What the chart shows (the link's text).
    pub title: String,
    /// The file, relative to the report.
    pub file: String,
}

/// Errors writing a report.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// A chart could not be drawn.
    #[cfg(feature = "plot")]
    #[error(transparent)]
    Plot(#[from] PlotError),
    /// A file could not be written.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
}

/// Everything a fit report is made from.
#[derive(Debug, Clone, Copy)]
pub struct FitReport<'a> {
    /// The calibration file written for the unit (serial, date, calibration).
    pub calfile: &'a CalFile,
    /// The fit's outcome (model, residuals, cross-validation, noise floor, notes).
    pub outcome: &'a FitOutcome,
    /// The calibration data fitted.
    pub data: &'a FitData,
    /// The options of the fit (the set-point grouping is taken from them).
    pub options: &'a FitOptions,
    /// The calibration data's file, as the user named it.
    pub source: &'a str,
    /// The unit the page and the charts give errors in, beside nepers (an absorbance product reads mAU, a
    /// gas detector % of ratio); magnitudes are shown as positive figures.
    pub unit: ErrorScale,
}

/// A serial made safe for a file name: letters, digits, `-`, `_` and `.` kept, anything else `_`.
pub fn file_prefix(unit: Option<&str>) -> String {
    match unit {
        Some(u) if !u.trim().is_empty() => u
            .trim()
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() || "-_.".contains(c) { c } else { '_' })
            .collect(),
        _ => "unit".to_string(),
    }
}

/// A UTC time stamp of seconds since the Unix epoch, e.g. `2025-03-04T10:20:30Z`.
pub fn utc(unix_s: u64) -> String {
    humantime::format_rfc3339_seconds(std::time::UNIX_EPOCH + std::time::Duration::from_secs(unix_s))
        .to_string()
}

impl FitReport<'_> {
    /// Renders the charts and the Markdown page, then writes them into `dir` (created if missing).
    /// Returns the files written, the page first. (Feature `plot`.)
    #[cfg(feature = "plot")]
    pub fn write_to(&self, dir: &Path) -> Result<Vec<PathBuf>, ReportError> {
        let prefix = file_prefix(self.calfile.unit.as_deref());
        let cal = &self.calfile.calibration;
        let who = self.calfile.unit.as_deref().map_or_else(|| "unit".to_string(), |u| format!("unit {u}"));
        let sub = format!(
            "{who}, calibrated {}, model {}",
            utc(self.calfile.created_unix_s),
            self.outcome.chosen.describe()
        );
        let floor = self.outcome.noise_floor_np;
        let vs_x = figures::error_vs_x(cal, self.data, self.options.setpoint_gap_k, floor, self.unit, &sub);
        let map = figures::f32_error_map(cal, 96, 40, &sub)?;
        let charts = [
            (format!("{prefix}-error-vs-x.svg"), vs_x.title.clone(), plot::render_lines(&vs_x)?),
            (format!("{prefix}-f32-error-map.svg"), map.title.clone(), plot::render_heat_map(&map)?),
        ];
        let links: Vec<ChartLink> = charts
            .iter()
            .map(|(file, title, _)| ChartLink { title: title.clone(), file: file.clone() })
            .collect();
        let page = self.render_markdown(&links);
        std::fs::create_dir_all(dir).map_err(|source| crate::file_error::FileError::io(dir, source))?;
        let mut files = vec![(dir.join(format!("{prefix}-fit-report.md")), page.into_bytes())];
        files.extend(charts.into_iter().map(|(f, _, svg)| (dir.join(f), svg.into_bytes())));
        let mut written = Vec::new();
        for (path, bytes) in files {
            crate::output::write_atomic(&path, &bytes)
                .map_err(|source| crate::file_error::FileError::io(&path, source))?;
            written.push(path);
        }
        Ok(written)
    }

    /// The Markdown page, linking the given charts.
    pub fn render_markdown(&self, charts: &[ChartLink]) -> String {
        let out = self.outcome;
        let cal = &self.calfile.calibration;
        let mut s = String::new();
        let unit = self.calfile.unit.as_deref().unwrap_or("(no serial)");
        let _ = writeln!(s, "# Fit report: unit {unit}\n");
        let _ = writeln!(
            s,
            "Generated by logtrim {}. File it with the unit's record.\n",
            env!("CARGO_PKG_VERSION")
        );
        let _ = writeln!(s, "| | |\n|---|---|");
        let _ = writeln!(s, "| unit | {unit} |");
        let _ = writeln!(s, "| calibrated | {} (UTC) |", utc(self.calfile.created_unix_s));
        let _ = writeln!(
            s,
            "| calibration data | `{}`: {} rows at {} set-points |",
            self.source,
            self.data.code.len(),
            out.setpoints.len()
        );
        let _ = writeln!(s, "| coefficients written by | {} |", self.calfile.generator);
        let _ = writeln!(s, "| model | {} |", out.chosen.describe());
        let _ = writeln!(
            s,
            "| ADC | {} bits, codes within {} of a rail refused |\n",
            cal.adc.bits, cal.adc.rail_margin
        );

        let _ = writeln!(s, "## Model\n");
        let sp = out.chosen;
        let chosen_by = if out.cv.is_empty() {
            "fixed (no cross-validation was run)".to_string()
        } else {
            format!("by leave-one-set-point-out cross-validation among {} sizes", out.cv.len())
        };
        let _ = writeln!(s, "Chosen {chosen_by}.\n");
        let _ = writeln!(s, "- offset: {} over temperature (Chebyshev)", terms(sp.offset_terms));
        let _ = writeln!(s, "- slope: {}, times T/T_ref (kT/q)", terms(sp.slope_terms));
        let _ = writeln!(
            s,
            "- gain pole (compensating resistor's tempco): {}",
            if sp.pole { "fitted" } else { "not fitted" }
        );
        let _ = writeln!(s, "- bulk resistance (high-end bend): {}", terms(sp.bulk_terms));
        let _ = writeln!(
            s,
            "- bias current (low-end bend, exponential in T): {}",
            if sp.bias { "fitted" } else { "not fitted" }
        );
        if sp.has_residual() {
            let _ = writeln!(s, "- generic residual: {} × {} terms in (x, T)", sp.residual_x, sp.residual_t);
        } else {
            let _ = writeln!(s, "- generic residual: none");
        }
        let _ = writeln!(s);

        let u = self.unit.label();
        // A magnitude in nepers as a positive figure in the page's unit.
        let inu = |np: f64| sci(self.unit.of_np(np).abs());
        let _ = writeln!(s, "## Residuals per set-point\n");
        let _ = writeln!(
            s,
            "Error in x = ln(I_sig/I_ref) of the firmware's correction against the applied ratio, in nepers \
             and in {u}.\n",
        );
        let _ =
            writeln!(s, "| set-point [°C] | rows | refused | rms [Np] | max [Np] | rms [{u}] | max [{u}] |");
        let _ = writeln!(s, "|---:|---:|---:|---:|---:|---:|---:|");
        for p in &out.setpoints {
            let _ = writeln!(
                s,
                "| {:.2} | {} | {} | {} | {} | {} | {} |",
                Num(p.temp_c),
                p.rows,
                p.refused,
                sci(p.rms_np),
                sci(p.max_np),
                inu(p.rms_np),
                inu(p.max_np)
            );
        }
        let _ = writeln!(s);

        let _ = writeln!(s, "## Cross-validation\n");
        if out.cv.is_empty() {
            let _ = writeln!(s, "None: the model size was not searched.\n");
        } else {
            let _ = writeln!(
                s,
                "Each fold leaves one interior set-point out, fits the rest and measures the error in x on the \
                 set-point left out: how the unit behaves between set-points.\n"
            );
            let _ = writeln!(s, "| chosen | model | rms [Np] | max [Np] | rms [{u}] | folds |");
            let _ = writeln!(s, "|:---:|---|---:|---:|---:|---:|");
            for r in &out.cv {
                let _ = writeln!(
                    s,
                    "| {} | {} | {} | {} | {} | {} |",
                    if r.chosen { "**yes**" } else { "" },
                    r.spec.describe(),
                    sci(r.rms),
                    sci(r.max),
                    inu(r.rms),
                    r.folds
                );
            }
            let _ = writeln!(s);
        }

        let _ = writeln!(s, "## Noise floor\n");
        match out.noise_floor_np {
            Some(f) => {
                let worst =
                    out.setpoints.iter().map(|p| p.rms_np).filter(|v| v.is_finite()).fold(0.0, f64::max);
                let _ = writeln!(
                    s,
                    "Scatter of repeated readings (same set-point, same ratio): {} Np = {} {u}. The worst \
                     set-point's rms is {:.2} × this floor; a calibration cannot do better than the floor.\n",
                    sci(f),
                    inu(f),
                    if f > 0.0 { worst / f } else { f64::NAN }
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    "Not measured: the data have too few repeated readings (same set-point, same ratio).\n"
                );
            }
        }

        let _ = writeln!(s, "## Calibrated ranges\n");
        let t = &cal.temperature;
        let xr = &cal.x_range;
        let (xmin, xmax) = (f64::from(xr.min), f64::from(xr.max));
        let _ = writeln!(s, "| quantity | from | to |\n|---|---:|---:|");
        let _ = writeln!(s, "| temperature [°C] | {:.2} | {:.2} |", Num::from(t.min_c), Num::from(t.max_c));
        let _ = writeln!(s, "| x = ln ratio [Np] | {:.4} | {:.4} |", Num(xmin), Num(xmax));
        let _ = writeln!(s, "| ratio I_sig/I_ref | {:.4e} | {:.4e} |", xmin.exp(), xmax.exp());
        let _ = writeln!(
            s,
            "| ratio [dB, 10·log10] | {:.3} | {:.3} |\n",
            Num(db_power(xmin)),
            Num(db_power(xmax))
        );
        if t.extrapolation_k > 0.0 {
            let _ = write!(
                s,
                "Readings up to {} K beyond the temperature range are corrected and flagged. ",
                t.extrapolation_k
            );
        } else {
            let _ = write!(s, "Readings outside the temperature range are refused. ");
        }
        let _ = writeln!(
            s,
            "Below a sensitivity of {} of ideal (where the bias current swamps the signal) the firmware \
             reports \"below range\".\n",
            xr.min_sensitivity
        );

        let _ = writeln!(s, "## Charts\n");
        if charts.is_empty() {
            let _ = writeln!(s, "None.\n");
        }
        for c in charts {
            let _ = writeln!(s, "- [{}]({})", c.title, c.file);
        }
        if !charts.is_empty() {
            let _ = writeln!(s);
        }
        if !out.notes.is_empty() {
            let _ = writeln!(s, "## Notes\n");
            for n in &out.notes {
                let _ = writeln!(s, "- {n}");
            }
        }
        s
    }
}

/// "1 term", "3 terms", "none".
fn terms(n: usize) -> String {
    match n {
        0 => "none".to_string(),
        1 => "1 term".to_string(),
        n => format!("{n} terms"),
    }
}

/// A figure in 3-significant-digit scientific notation; a missing figure as "—".
fn sci(v: f64) -> String {
    if v.is_finite() {
        format!("{:.3e}", Num(v))
    } else {
        "—".to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_and_dates() {
        assert_eq!(file_prefix(Some("U0001")), "U0001");
        assert_eq!(file_prefix(Some("line 3/unit 7")), "line_3_unit_7");
        assert_eq!(file_prefix(None), "unit");
        assert_eq!(file_prefix(Some("  ")), "unit");
        // 1 000 000 000 s after the epoch is 2001-09-09 01:46:40 UTC (a well-known Unix time).
        assert_eq!(utc(1_000_000_000), "2001-09-09T01:46:40Z");
    }
}
