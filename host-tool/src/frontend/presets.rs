//! Built-in front-end descriptions, set in invented scenarios, for users to start from.

use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::thermistor::Beta;
use logtrim::{Divider, Placement};

use super::{
    AdcModel, AmplifierModel, FrontEnd, OperatingRange, OutputStage, PairModel, TemperatureMeasurement,
    UnitSpread,
};

/// A built-in front-end description.
#[derive(Debug, Clone, Copy)]
pub struct Preset {
    /// The name given to `--preset`.
    pub name: &'static str,
    /// One line on what it describes.
    pub summary: &'static str,
    build: fn() -> FrontEnd,
}

impl Preset {
    /// The description itself.
    pub fn frontend(&self) -> FrontEnd {
        (self.build)()
    }
}

/// Every built-in description.
pub const PRESETS: &[Preset] = &[
    Preset {
        name: "photometer-compensated",
        summary: "bench absorbance photometer channel: partly compensated, 0…70 °C, mild low-end bend",
        build: photometer_compensated,
    },
    Preset {
        name: "gas-uncompensated",
        summary:
            "outdoor gas detector with a reference channel: uncompensated, −20…85 °C, strong low-end bend",
        build: gas_uncompensated,
    },
    Preset {
        name: "photometer-ntc",
        summary:
            "the bench photometer with its temperature read raw: a 10 kΩ NTC behind a divider, 12-bit ADC",
        build: photometer_ntc,
    },
];

/// The built-in description of that name.
pub fn preset(name: &str) -> Option<FrontEnd> {
    PRESETS.iter().find(|p| p.name == name).map(Preset::frontend)
}

/// Unit-to-unit spread typical of a small production line (invented figures of common size).
fn line_spread(compensated: bool) -> UnitSpread {
    UnitSpread {
        ideality: 0.001,
        mismatch_v: 0.5e-3,
        bulk_resistance_rel: 0.15,
        offset_v: 0.3e-3,
        offset_drift_v_per_k: 1.5e-6,
        bias_rel: 0.3,
        gain_rel: 0.002,
        tempco_per_k: if compensated { 50e-6 } else { 0.0 },
        level_shift_v: 2e-3,
        adc_gain_error: 0.001,
        adc_offset_codes: 2.0,
        sensor_offset_k: 0.15,
        sensor_element_rel: 0.005,
    }
}

/// An invented bench photometer's sample channel: a compensating resistor of
/// +3500 ppm/K leaves about 2 % of slope drift over 0…70 °C; 20 pA bias current.
fn photometer_compensated() -> FrontEnd {
    FrontEnd {
        name: "photometer-compensated".into(),
        description: "Bench absorbance photometer, sample channel (invented scenario): log-ratio front end with \
                      a +3500 ppm/K compensating resistor, 0…70 °C, ratios 1e-3…1e2 (5 decades), ~0.5 V/decade."
            .into(),
        pair: PairModel {
            ideality: 1.004,
            i_ref_a: 1.0e-6,
            mismatch_v_25c: 0.6e-3,
            bulk_resistance_ohm: 5.0,
        },
        amplifiers: AmplifierModel {
            input_offset_v: 150e-6,
            input_offset_drift_v_per_k: 2.0e-6,
            output_offset_v: -300e-6,
            output_offset_drift_v_per_k: 3.0e-6,
            bias_signal_a_25c: 20e-12,
            bias_reference_a_25c: 5e-12,
            bias_doubling_k: 10.0,
        },
        output_stage: OutputStage { gain_25c: 8.45, r1_tempco_per_k: 3500e-6, level_shift_v: 1.72 },
        adc: AdcModel { bits: 16, vref_v: 3.3, gain_error: 0.0015, offset_codes: 3.0, noise_codes_rms: 0.7 },
        temperature_sensor: TemperatureMeasurement::Digital {
            offset_k: 0.15,
            slope_error: 0.002,
            noise_k_rms: 0.03,
            resolution_k: 0.0078125,
        },
        operating: OperatingRange {
            temp_min_c: 0.0,
            temp_max_c: 70.0,
            ratio_min: 1e-3,
            ratio_max: 1e2,
            setpoint_jitter_k_rms: 0.05,
        },
        spread: Some(line_spread(true)),
        aging: None,
        chamber_faults: None,
    }
}

/// An invented outdoor gas detector's measuring channel: no compensating
/// resistor, so the slope follows kT/q (+35 % from −20 to 85 °C); 50 pA bias current that grows to 3.2 nA at
/// 85 °C and bends the low end hard.
fn gas_uncompensated() -> FrontEnd {
    FrontEnd {
        name: "gas-uncompensated".into(),
        description: "Outdoor gas detector, measuring vs reference channel (invented scenario): \
                      uncompensated log-ratio front end, −20…85 °C, ratios 1e-3…1e2, ~0.5 V/decade at 25 °C, \
                      strong bias-current bend at the hot low end."
            .into(),
        pair: PairModel {
            ideality: 1.006,
            i_ref_a: 1.0e-6,
            mismatch_v_25c: -1.1e-3,
            bulk_resistance_ohm: 6.0,
        },
        amplifiers: AmplifierModel {
            input_offset_v: -250e-6,
            input_offset_drift_v_per_k: 4.0e-6,
            output_offset_v: 400e-6,
            output_offset_drift_v_per_k: -2.5e-6,
            bias_signal_a_25c: 50e-12,
            bias_reference_a_25c: 10e-12,
            bias_doubling_k: 10.0,
        },
        output_stage: OutputStage { gain_25c: 8.45, r1_tempco_per_k: 0.0, level_shift_v: 2.0 },
        adc: AdcModel {
            bits: 16,
            vref_v: 4.096,
            gain_error: -0.002,
            offset_codes: -4.0,
            noise_codes_rms: 0.7,
        },
        temperature_sensor: TemperatureMeasurement::Digital {
            offset_k: -0.2,
            slope_error: 0.0,
            noise_k_rms: 0.05,
            resolution_k: 0.0625,
        },
        operating: OperatingRange {
            temp_min_c: -20.0,
            temp_max_c: 85.0,
            ratio_min: 1e-3,
            ratio_max: 1e2,
            setpoint_jitter_k_rms: 0.1,
        },
        spread: Some(line_spread(false)),
        aging: None,
        chamber_faults: None,
    }
}

/// The NTC channel of the photometer variant: a 10 kΩ (at 25 °C) thermistor with β = 3900 K from the
/// 12-bit ADC's input to ground, a 10 kΩ series resistor to the ADC's reference (so the code rises as
/// the NTC cools), valid −40…125 °C; 8 codes at either rail count as open or short (invented figures).
fn photometer_ntc_channel() -> TemperatureSensor {
    let beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3900.0 };
    let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 12).with_margins(8, 8);
    TemperatureSensor::new(SensorElement::NtcBeta(beta), divider, -40.0, 125.0)
}

/// The bench photometer of [`photometer_compensated`] in a cost-reduced build: instead of a digital
/// sensor, an NTC thermistor behind a divider on a spare 12-bit ADC input, linearised by the firmware. This
/// unit's NTC reads 0.6 % above its nominal R25, its 0.1 % series resistor 0.04 % low, and the NTC sits
/// 0.1 K warmer than the pair (invented figures).
fn photometer_ntc() -> FrontEnd {
    let base = photometer_compensated();
    FrontEnd {
        name: "photometer-ntc".into(),
        description: "Bench absorbance photometer, sample channel, cost-reduced build (invented scenario): the \
                      compensated front end with its temperature read raw from a 10 kΩ NTC (β 3900 K) behind a \
                      10 kΩ divider on a 12-bit ADC."
            .into(),
        temperature_sensor: TemperatureMeasurement::Raw {
            sensor: photometer_ntc_channel(),
            element_error: 0.006,
            series_error: -0.0004,
            offset_k: 0.1,
            noise_codes_rms: 0.4,
        },
        ..base
    }
}
