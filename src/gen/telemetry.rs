//! The demo's invented scenario: ten-minute telemetry from the turbines of a wind farm.
//! Columns are correlated the way a reader expects (power follows a power curve of wind
//! speed, faults cut power), drawn from one stream per block so rows stay consistent.

use super::rng::{Stream, BLOCK_ROWS};
use crate::table::{Column, ColumnData, ElemType, Table};

/// Wind speed (m/s) below which turbines idle.
pub const CUT_IN: f64 = 3.0;
/// Wind speed (m/s) at which turbines reach rated power.
pub const RATED_SPEED: f64 = 12.0;
/// Wind speed (m/s) above which turbines shut down.
pub const CUT_OUT: f64 = 25.0;
/// Rated power (kW) of the invented turbine model.
pub const RATED_KW: f64 = 2500.0;
/// First timestamp (seconds since 1970, 2026-01-01T00:00Z).
const T0: u64 = 1_767_225_600;

/// Expected power (kW) at wind speed `v`: cubic between cut-in and rated speed.
pub fn power_curve(v: f64) -> f64 {
    if !(CUT_IN..CUT_OUT).contains(&v) {
        0.0
    } else if v >= RATED_SPEED {
        RATED_KW
    } else {
        let c3 = CUT_IN * CUT_IN * CUT_IN;
        RATED_KW * (v * v * v - c3) / (RATED_SPEED * RATED_SPEED * RATED_SPEED - c3)
    }
}

/// The column names and types of the readings table.
pub const SCHEMA: [(&str, ElemType); 7] = [
    ("turbine_id", ElemType::U16),
    ("ts", ElemType::U32),
    ("wind_speed", ElemType::F32),
    ("rotor_rpm", ElemType::F32),
    ("nacelle_temp", ElemType::F32),
    ("power", ElemType::F32),
    ("fault", ElemType::U1),
];

/// Rows `rows` of the readings table for `turbines` turbines.
pub fn generate(seed: u64, table: &str, turbines: u32, rows: std::ops::Range<u64>) -> Table {
    let n = (rows.end - rows.start) as usize;
    let t = u64::from(turbines.max(1));
    let mut id = Vec::with_capacity(n);
    let mut ts = Vec::with_capacity(n);
    let (mut wind, mut rpm, mut temp, mut power) = (
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    );
    let mut fault = Vec::with_capacity(n);
    for b in rows.start / BLOCK_ROWS..rows.end.div_ceil(BLOCK_ROWS) {
        let mut s = Stream::new(seed, table, "telemetry", b);
        for r in b * BLOCK_ROWS..(b + 1) * BLOCK_ROWS {
            let v = s.weibull(2.0, 8.0).min(40.0);
            let faulty = s.chance(0.03);
            let derate = if faulty { 0.5 + 0.5 * s.unit() } else { 0.0 };
            let noise = [s.normal(), s.normal(), s.normal()];
            if !rows.contains(&r) {
                continue;
            }
            let spin = if (CUT_IN..CUT_OUT).contains(&v) {
                6.0 + 9.0 * ((v - CUT_IN) / (RATED_SPEED - CUT_IN)).min(1.0)
            } else {
                0.0
            };
            let p = power_curve(v) * (1.0 - derate) * (1.0 + 0.02 * noise[0]);
            id.push((r % t) as u16);
            ts.push((T0 + (r / t) * 600) as u32);
            wind.push(v as f32);
            rpm.push((spin + 0.2 * noise[1]).max(0.0) as f32);
            temp.push((35.0 + 0.8 * v + 3.0 * noise[2]) as f32);
            power.push(p.max(0.0) as f32);
            fault.push(u8::from(faulty));
        }
    }
    let data = [
        ColumnData::U16(id),
        ColumnData::U32(ts),
        ColumnData::F32(wind),
        ColumnData::F32(rpm),
        ColumnData::F32(temp),
        ColumnData::F32(power),
        ColumnData::U8(fault),
    ];
    let columns = SCHEMA
        .iter()
        .zip(data)
        .map(|((name, ty), d)| Column::new(name, *ty, d).expect("telemetry values fit"))
        .collect();
    Table::new(table, columns).expect("telemetry columns have equal length")
}
