//! The budget's figures from a design's one description, [`FrontEnd`] (the file `simulate` reads and
//! `simulate --write-preset` writes): what the description gives is taken from it, every other figure
//! keeps its default (see [`BudgetSpec::from_design`]); a raw temperature channel's figures from the sensor
//! file the other verbs read ([`BudgetSpec::with_sensor`]).

use std::path::Path;

use logtrim::physics::ZERO_CELSIUS_K;
use logtrim::sensor::TemperatureSensor;

use super::{BudgetError, BudgetSpec, LN10};
use crate::frontend::{FrontEnd, TemperatureMeasurement};

/// Temperatures at which a raw channel's resolution is looked at, over the operating range.
const RESOLUTION_STEPS: u32 = 100;

/// Top-level keys of the budget figures files of earlier versions, none of which a [`FrontEnd`] has.
const FIGURES_FILE_KEYS: [&str; 5] = ["front_end", "reference", "temperature", "arithmetic", "note"];

/// Reads a design's description for the budget: a [`FrontEnd`] file. A budget figures file of an earlier
/// version is named as such ([`BudgetError::FiguresFile`]) rather than refused key by key.
pub fn read_design(path: &Path) -> Result<FrontEnd, BudgetError> {
    let text = crate::file_error::read_text(path)?;
    let name = path.display().to_string();
    if let Ok(serde_json::Value::Object(map)) = serde_json::from_str::<serde_json::Value>(&text) {
        if let Some(key) = FIGURES_FILE_KEYS.iter().find(|k| map.contains_key(**k)) {
            return Err(BudgetError::FiguresFile { path: name, key: (*key).to_string() });
        }
    }
    Ok(FrontEnd::from_json(&text, &name)?)
}

/// The noise of a raw temperature channel in K rms: its ADC noise and quantisation, `√(σ² + 1/12)` codes,
/// at its coarsest K per code over `lo_c … hi_c`.
fn raw_channel_noise_k(
    sensor: &TemperatureSensor,
    noise_codes_rms: f64,
    lo_c: f64,
    hi_c: f64,
) -> Result<f64, BudgetError> {
    let h = 1e-3;
    let code = |t: f64| sensor.code_f64(t).map_err(|error| BudgetError::DesignSensor { at_c: t, error });
    let mut coarsest = 0.0f64;
    for i in 0..=RESOLUTION_STEPS {
        let t = lo_c + (hi_c - lo_c) * f64::from(i) / f64::from(RESOLUTION_STEPS);
        let slope = (code(t + h)? - code(t - h)?) / (2.0 * h);
        coarsest = coarsest.max(1.0 / slope.abs());
    }
    Ok((noise_codes_rms * noise_codes_rms + 1.0 / 12.0).sqrt() * coarsest)
}

impl BudgetSpec {
    /// The figures of a design described as a [`FrontEnd`]:
    ///
    /// | figure | from the description |
    /// |---|---|
    /// | `adc.bits`, `adc.vref_v` | `adc.bits`, `adc.vref_v` |
    /// | `adc.noise_lsb_rms` | `adc.noise_codes_rms` |
    /// | `reference.tolerance` | the converter's gain error ε as a reference error, `|1/(1 + ε) − 1|` |
    /// | `front_end.slope_v_per_decade` at `slope_at_c` = 25 °C | `n·(kT/q)·G(25 °C)·ln 10` ([`FrontEnd::ideal_slope_v_per_neper`]) |
    /// | `front_end.slope_drift_ppm_per_k` | none (the PTAT law) without compensation (`r1_tempco_per_k` = 0); else the slope's drift at 25 °C, `1/T₂₅ − α·(G₂₅ − 1)/G₂₅` |
    /// | `front_end.zero_v` | the output at ratio 1 and 25 °C, as calibrated ([`FrontEnd::output_voltage`]) |
    /// | ratio and temperature ranges | `operating` |
    /// | `temperature.sensor_noise_k_rms` | a digital sensor's noise and resolution, `√(σ² + r²/12)`; a raw channel's ADC noise and quantisation, `√(σ² + 1/12)` codes, at its coarsest K per code over the operating range |
    ///
    /// The rest — oversampling, the reference's drift, the temperature sensor's accuracy (the description's
    /// sensor errors are stable, which a calibration absorbs), readings averaged, the calibration
    /// temperature and the arithmetic's error — are not part of the description and keep their defaults.
    pub fn from_design(fe: &FrontEnd) -> Result<BudgetSpec, BudgetError> {
        fe.validate()?;
        let fe = fe.as_calibrated();
        let mut s = BudgetSpec { note: format!("from the design {:?}", fe.name), ..BudgetSpec::default() };
        s.adc.bits = fe.adc.bits;
        s.adc.vref_v = fe.adc.vref_v;
        s.adc.noise_lsb_rms = fe.adc.noise_codes_rms;
        s.reference.tolerance = (1.0 / (1.0 + fe.adc.gain_error) - 1.0).abs();
        let g = &fe.output_stage;
        s.front_end.slope_v_per_decade = LN10 * fe.ideal_slope_v_per_neper(25.0);
        s.front_end.slope_at_c = 25.0;
        s.front_end.slope_drift_ppm_per_k = (g.r1_tempco_per_k != 0.0).then(|| {
            let drift = 1.0 / (25.0 + ZERO_CELSIUS_K) - g.r1_tempco_per_k * (g.gain_25c - 1.0) / g.gain_25c;
            drift * 1e6
        });
        s.front_end.zero_v = fe.output_voltage(0.0, 25.0);
        s.front_end.ratio_min = fe.operating.ratio_min;
        s.front_end.ratio_max = fe.operating.ratio_max;
        s.temperature.min_c = fe.operating.temp_min_c;
        s.temperature.max_c = fe.operating.temp_max_c;
        s.temperature.sensor_noise_k_rms = match fe.temperature_sensor {
            TemperatureMeasurement::Digital { noise_k_rms, resolution_k, .. } => {
                (noise_k_rms * noise_k_rms + resolution_k * resolution_k / 12.0).sqrt()
            }
            TemperatureMeasurement::Raw { sensor, noise_codes_rms, .. } => raw_channel_noise_k(
                &sensor,
                noise_codes_rms,
                fe.operating.temp_min_c,
                fe.operating.temp_max_c,
            )?,
        };
        Ok(s)
    }

    /// The figures with the temperature read by a raw channel, `sensor` (the file `fit --sensor` reads):
    /// the temperature noise becomes the channel's, its ADC noise of `noise_codes_rms` codes and its
    /// quantisation at its coarsest K per code over the temperature range (checked to read over all of it).
    pub fn with_sensor(
        mut self,
        sensor: &TemperatureSensor,
        noise_codes_rms: f64,
    ) -> Result<BudgetSpec, BudgetError> {
        self.validate()?;
        self.temperature.sensor_noise_k_rms =
            raw_channel_noise_k(sensor, noise_codes_rms, self.temperature.min_c, self.temperature.max_c)?;
        Ok(self)
    }
}
