//! Hand-made calibrations shared by the crate's unit tests (invented values), so that no test module
//! keeps its own copy: the f32 units of [`calibrations`] (shared with every crate's tests), and a linear
//! fixed-point unit.

use std::vec;
use std::vec::Vec;

use crate::calibration::{BiasTerm, Calibration, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL};

pub(crate) mod calibrations;
use crate::error::SensorFault;
use crate::fixed::{FixedCalibration, FixedHeader, SensorTable, LAYOUT_VERSION};
pub(crate) use calibrations::{bent, hard};

/// Six times the uniform cubic B-spline basis at `t ∈ [0, 1]`, in f64 (de Boor, "A Practical Guide to
/// Splines"): the reference the integer basis weights and spline paths are checked against.
pub(crate) fn bspline_basis6(t: f64) -> [f64; 4] {
    let s = 1.0 - t;
    [
        s * s * s,
        3.0 * t * t * t - 6.0 * t * t + 4.0,
        -3.0 * t * t * t + 3.0 * t * t + 3.0 * t + 1.0,
        t * t * t,
    ]
}

/// The x range's ends of [`linear_fixed`]: 27306 codes from the centre, Q24 Np.
pub(crate) const LINEAR_X_LIM: i32 = 27306 * 3072;

/// A linear unit: x = (code − 32769)·6/32768 Np at every temperature (values whose control points divide
/// by 6 exactly), −5…55 °C accepted, 0…50 °C calibrated, x in ±27306·6/32768 Np (about ±5 Np), a
/// temperature channel with θ = 15 m°C per code from code 100 to 4000. Owned tables, for tests to change.
pub(crate) struct LinearFixed {
    pub(crate) header: FixedHeader,
    pub(crate) offset: Vec<i32>,
    pub(crate) inv_slope: Vec<i32>,
    pub(crate) ln_bias: Vec<i32>,
    pub(crate) u_min: Vec<i32>,
    pub(crate) residual: Vec<i16>,
    /// The sensor table's control points ([`sensor_table`]).
    pub(crate) sensor: Vec<i32>,
    /// Whether the view has the sensor table.
    pub(crate) has_sensor: bool,
}

/// The header of [`linear_fixed`]: 16-bit converter with a rail margin of 16, 0…50 °C calibrated and
/// −5…55 °C accepted, 4 temperature knots 20 K apart from −5 °C, 5 x̃ knots 4.5 Np apart from −9 Np, no bias
/// bend, no sensitivity limit, x in ±[`LINEAR_X_LIM`].
pub(crate) const LINEAR_HEADER: FixedHeader = FixedHeader {
    layout: LAYOUT_VERSION,
    adc_max_code: 65535,
    rail_margin: 16,
    temp_min: 0,
    temp_max: 50_000 * 1024,
    temp_lo: -5_000 * 1024,
    temp_hi: 55_000 * 1024,
    // Knots every 2^24 θ (16.38 K) from −5 °C: the fifth is past 55 °C.
    t_knots: 5,
    t_origin: -5_000 * 1024,
    t_step_log2: 24,
    offset_frac: 14,
    inv_slope_frac: 42,
    bias_bend: false,
    sensitivity_limit: false,
    // Knots every 4 Np from −9 Np: the sixth (11 Np) is past every x̃.
    xa_knots: 6,
    xa_origin: -9 * (1 << 24),
    xa_step_log2: 26,
    residual_frac: 16,
    x_min: -LINEAR_X_LIM,
    x_max: LINEAR_X_LIM,
};

/// A temperature-sensor table over codes 100…4000 in 256-code steps (`knots`: 19 control points), the model's
/// range beyond them, a short below code 10 and an open circuit above 4090.
pub(crate) fn sensor_table(knots: &[i32]) -> SensorTable<'_> {
    SensorTable {
        code_lo: 100,
        code_hi: 4000,
        step_log2: 8,
        fault_below: SensorFault::OutOfModelRange,
        far_below_code: 10,
        fault_far_below: SensorFault::Short,
        fault_above: SensorFault::OutOfModelRange,
        far_above_code: 4090,
        fault_far_above: SensorFault::Open,
        knots,
    }
}

/// The linear fixed-point unit (see [`LinearFixed`]).
pub(crate) fn linear_fixed() -> LinearFixed {
    let header = LINEAR_HEADER;
    LinearFixed {
        header,
        // Stored divided by 6: O = 32769 codes · 2^14, 1/S = 6/32768 Np/code · 2^42.
        offset: vec![10923 << 13; 7],
        inv_slope: vec![1 << 27; 7],
        ln_bias: vec![],
        u_min: vec![],
        residual: vec![0; 7 * 8],
        // θ(code) = (code − 100)·15 m°C; control point i sits at knot i − 1 (code 100 + 256(i − 1)),
        // stored divided by 6: (3900 >> 8) + 4 = 19 of them.
        sensor: (0..19).map(|i| (i - 1) * 256 * 15 * 1024 / 6).collect(),
        has_sensor: true,
    }
}

impl LinearFixed {
    pub(crate) fn view(&self) -> FixedCalibration<'_> {
        FixedCalibration {
            header: self.header,
            offset: &self.offset,
            inv_slope: &self.inv_slope,
            ln_bias: &self.ln_bias,
            u_min: &self.u_min,
            residual: &self.residual,
            sensor: self.has_sensor.then(|| sensor_table(&self.sensor)),
        }
    }
}
