//! Column generators: per-column value distributions, including the scan's selectivity
//! generator, and planted corner rows.
//!
//! A `select` column draws, per row, "match" with probability `selectivity`; a matching
//! row takes a value in the match range `[lo, hi)`, any other row a value outside it (in
//! the column's `[min, max]`). Values inside each side are uniform, or Zipf-skewed over
//! the side's values (rank 0 = the side's first value) for hot-key workloads.
//!
//! Corner rows overwrite rows at positions drawn per block: each range bound and its
//! neighbours (lo−1, lo, hi−1, hi for integers; lo, hi and the next float below each for
//! floats), the type's minimum and maximum, and for floats NaN, −0.0, +0.0, +∞ and −∞.

use rayon::prelude::*;

use super::rng::{Stream, Zipf, BLOCK_ROWS};
use crate::table::{Column, ColumnData, ElemType};

/// Value skew inside a side of a `select` column.
#[derive(Debug, Clone, PartialEq)]
pub enum Skew {
    /// Every value equally likely.
    Uniform,
    /// Zipf with exponent θ over at most `distinct` values per side.
    Zipf {
        /// Exponent θ ≥ 0 (0 is uniform over the distinct values).
        theta: f64,
        /// Distinct values per side.
        distinct: u64,
    },
}

/// A column's distribution.
#[derive(Debug, Clone, PartialEq)]
pub enum Dist {
    /// Uniform in `[min, max]` (floats: `[min, max)`).
    Uniform { min: f64, max: f64 },
    /// Normal, clamped to `[min, max]`.
    Normal {
        mean: f64,
        sd: f64,
        min: f64,
        max: f64,
    },
    /// `start + step * global_row`.
    Sequence { start: f64, step: f64 },
    /// Requested selectivity for the match range `[lo, hi)` within `[min, max]`.
    Select {
        selectivity: f64,
        lo: f64,
        hi: f64,
        min: f64,
        max: f64,
        skew: Skew,
    },
}

/// One generated column.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnGen {
    /// Column name.
    pub name: String,
    /// Element type.
    pub ty: ElemType,
    /// Distribution.
    pub dist: Dist,
    /// Plant corner rows.
    pub corners: bool,
}

/// A generated value before conversion to the column type.
#[derive(Debug, Clone, Copy)]
enum V {
    I(i128),
    F(f64),
}

/// The most distinct values per side of a Zipf-skewed column (the sampler keeps a table
/// of this size).
pub const MAX_DISTINCT: u64 = 1 << 24;

impl ColumnGen {
    /// Checks the parameters against the type; the message names the column.
    pub fn validate(&self) -> Result<(), String> {
        let n = &self.name;
        let ok = |c: bool, m: &str| {
            if c {
                Ok(())
            } else {
                Err(format!("column `{n}`: {m}"))
            }
        };
        // Integer columns take whole numbers inside the type (one past its maximum for an
        // exclusive bound), never values that would be clamped or truncated silently.
        let int_param = |key: &str, v: f64, excl: bool| -> Result<(), String> {
            if self.ty.is_float() {
                return ok(!v.is_nan(), &format!("`{key}` is NaN"));
            }
            let (tmin, tmax) = self.ty.int_range();
            let top = tmax + i128::from(excl);
            ok(
                v.is_finite() && v.fract() == 0.0 && v >= tmin as f64 && v <= top as f64,
                &format!(
                    "`{key}` = {v} is not a whole number within the {} range {tmin}..={top}",
                    self.ty
                ),
            )
        };
        match &self.dist {
            Dist::Uniform { min, max } => {
                int_param("min", *min, false)?;
                int_param("max", *max, false)?;
                ok(min <= max, "min must not exceed max")
            }
            Dist::Normal { sd, min, max, .. } => {
                for (k, v) in [("min", min), ("max", max)] {
                    if v.is_finite() {
                        int_param(k, *v, false)?;
                    }
                }
                ok(*sd >= 0.0 && min <= max, "needs sd >= 0 and min <= max")
            }
            Dist::Sequence { start, step } => {
                int_param("start", *start, false)?;
                if self.ty.is_float() {
                    Ok(())
                } else {
                    ok(
                        step.is_finite() && step.fract() == 0.0,
                        "`step` must be a whole number",
                    )
                }
            }
            Dist::Select {
                selectivity,
                lo,
                hi,
                min,
                max,
                skew,
            } => {
                ok(
                    (0.0..=1.0).contains(selectivity),
                    "selectivity must be within 0..=1",
                )?;
                int_param("lo", *lo, false)?;
                int_param("hi", *hi, true)?;
                int_param("min", *min, false)?;
                int_param("max", *max, false)?;
                ok(
                    min <= lo && lo < hi && hi <= max,
                    "needs min <= lo < hi <= max",
                )?;
                if !self.ty.is_float() {
                    let (tmin, tmax) = self.ty.int_range();
                    ok(
                        *min as i128 >= tmin && *max as i128 <= tmax,
                        &format!("min..max must lie within the {} range", self.ty),
                    )?;
                    let outside = (*lo - *min) + (*max - *hi + 1.0);
                    ok(
                        outside > 0.0 || *selectivity == 1.0,
                        "no values lie outside lo..hi",
                    )?;
                }
                if let Skew::Zipf { theta, distinct } = skew {
                    ok(
                        theta.is_finite() && *theta >= 0.0 && (1..=MAX_DISTINCT).contains(distinct),
                        &format!(
                            "zipf needs a finite theta >= 0 and 1 <= distinct <= {MAX_DISTINCT}"
                        ),
                    )?;
                }
                Ok(())
            }
        }
    }

    /// The corner values to plant.
    fn corner_values(&self) -> Vec<V> {
        let mut v = Vec::new();
        if let Dist::Select { lo, hi, .. } = &self.dist {
            if self.ty.is_float() {
                for b in [*lo, *hi] {
                    v.push(V::F(b));
                    v.push(V::F(next_down(b, self.ty)));
                }
            } else {
                for b in [*lo as i128, *hi as i128] {
                    v.push(V::I(b - 1));
                    v.push(V::I(b));
                }
            }
        }
        if self.ty.is_float() {
            v.extend([f64::NAN, -0.0, 0.0, f64::INFINITY, f64::NEG_INFINITY].map(V::F));
            let m = if self.ty == ElemType::F32 {
                f64::from(f32::MAX)
            } else {
                f64::MAX
            };
            v.extend([V::F(-m), V::F(m)]);
        } else {
            let (a, b) = self.ty.int_range();
            v.extend([V::I(a), V::I(b)]);
        }
        v
    }

    /// Rows `rows` (global row numbers) of the column of a table of `total` rows, generated
    /// in parallel over groups of blocks (values depend only on their block and the table
    /// size, so the split does not matter).
    pub fn generate(
        &self,
        seed: u64,
        table: &str,
        total: u64,
        rows: std::ops::Range<u64>,
    ) -> Column {
        const GROUP: u64 = 64 * BLOCK_ROWS;
        let starts: Vec<u64> = std::iter::once(rows.start)
            .chain((rows.start / GROUP + 1..rows.end.div_ceil(GROUP)).map(|g| g * GROUP))
            .collect();
        let parts: Vec<ColumnData> = starts
            .par_iter()
            .enumerate()
            .map(|(i, &a)| {
                let b = starts.get(i + 1).copied().unwrap_or(rows.end);
                self.generate_range(seed, table, total, a..b.max(a))
            })
            .collect();
        let mut data = ColumnData::with_capacity(self.ty, (rows.end - rows.start) as usize);
        for p in &parts {
            data.append(p);
        }
        Column::new(&self.name, self.ty, data).expect("generated values fit their type")
    }

    fn generate_range(
        &self,
        seed: u64,
        table: &str,
        total: u64,
        rows: std::ops::Range<u64>,
    ) -> ColumnData {
        let mut data = ColumnData::with_capacity(self.ty, (rows.end - rows.start) as usize);
        let zipf = match &self.dist {
            Dist::Select {
                skew: Skew::Zipf { theta, distinct },
                ..
            } => Some(Zipf::new(*distinct, *theta)),
            _ => None,
        };
        let corners = if self.corners {
            self.corner_values()
        } else {
            Vec::new()
        };
        let ip = IntParams::of(&self.dist);
        let (tmin, tmax) = if self.ty.is_float() {
            (0, 0)
        } else {
            self.ty.int_range()
        };
        let mut block_vals: Vec<V> = Vec::with_capacity(BLOCK_ROWS as usize);
        let first_block = rows.start / BLOCK_ROWS;
        let last_block = rows.end.div_ceil(BLOCK_ROWS);
        for b in first_block..last_block {
            let mut s = Stream::new(seed, table, &self.name, b);
            let b0 = b * BLOCK_ROWS;
            block_vals.clear();
            block_vals
                .extend((b0..b0 + BLOCK_ROWS).map(|r| self.draw(&mut s, r, zipf.as_ref(), &ip)));
            // Corners go to distinct rows that exist: the last block of a table may be
            // short, and a corner must not overwrite another.
            let len = total.saturating_sub(b0).min(BLOCK_ROWS) as usize;
            let mut taken: Vec<usize> = Vec::with_capacity(corners.len());
            for c in corners.iter().take(len) {
                let mut at = s.int_in(0, len as i128 - 1) as usize;
                while taken.contains(&at) {
                    at = (at + 1) % len;
                }
                taken.push(at);
                block_vals[at] = *c;
            }
            let lo = rows.start.max(b0) - b0;
            let hi = rows.end.min(b0 + BLOCK_ROWS) - b0;
            for v in &block_vals[lo as usize..hi as usize] {
                push(&mut data, *v, tmin, tmax);
            }
        }
        data
    }

    fn draw(&self, s: &mut Stream, row: u64, zipf: Option<&Zipf>, ip: &IntParams) -> V {
        let float = self.ty.is_float();
        match &self.dist {
            Dist::Uniform { min, max } => {
                if float {
                    V::F(min + (max - min) * s.unit())
                } else {
                    V::I(s.int_in(ip.min, ip.max))
                }
            }
            Dist::Normal { mean, sd, min, max } => {
                let x = (mean + sd * s.normal()).clamp(*min, *max);
                if float {
                    V::F(x)
                } else {
                    V::I(libm::round(x) as i128)
                }
            }
            Dist::Sequence { start, step } => {
                if float {
                    V::F(start + step * row as f64)
                } else {
                    V::I(ip.lo + ip.hi * row as i128)
                }
            }
            Dist::Select {
                selectivity,
                lo,
                hi,
                min,
                max,
                ..
            } => {
                let hit = s.chance(*selectivity);
                if float {
                    let u = match zipf {
                        Some(z) => (z.sample(s) as f64 + s.unit()) / z.ranks() as f64,
                        None => s.unit(),
                    };
                    if hit {
                        V::F(lo + (hi - lo) * u)
                    } else {
                        // Outside: map u over [min, lo) ∪ [hi, max) by length.
                        let (a, b) = (lo - min, max - hi);
                        let x = u * (a + b);
                        V::F(if x < a { min + x } else { hi + (x - a) })
                    }
                } else {
                    let IntParams { lo, hi, min, max } = *ip;
                    let (side_lo, count) = if hit {
                        (lo, hi - lo)
                    } else {
                        (0, (lo - min) + (max - hi + 1))
                    };
                    let k = match zipf {
                        Some(z) => spread_rank(z.sample(s), z.ranks() as i128, count, s),
                        None => s.int_in(0, count - 1),
                    };
                    if hit {
                        V::I(side_lo + k)
                    } else if k < lo - min {
                        V::I(min + k)
                    } else {
                        V::I(hi + (k - (lo - min)))
                    }
                }
            }
        }
    }
}

/// Integer forms of a distribution's parameters, converted once per call rather than per
/// row (`lo`/`hi` hold `start`/`step` for sequences).
#[derive(Debug, Clone, Copy, Default)]
struct IntParams {
    lo: i128,
    hi: i128,
    min: i128,
    max: i128,
}

impl IntParams {
    fn of(d: &Dist) -> IntParams {
        let i = |x: f64| x as i128;
        match *d {
            Dist::Uniform { min, max } => IntParams {
                min: i(min),
                max: i(max),
                ..Default::default()
            },
            Dist::Sequence { start, step } => IntParams {
                lo: i(start),
                hi: i(step),
                ..Default::default()
            },
            Dist::Select {
                lo, hi, min, max, ..
            } => IntParams {
                lo: i(lo),
                hi: i(hi),
                min: i(min),
                max: i(max),
            },
            Dist::Normal { .. } => IntParams::default(),
        }
    }
}

/// Maps a Zipf rank among `ranks` to an offset in `0..count`: rank k covers the k-th of
/// `ranks` equal slices of the side, and a uniform draw picks a value within the slice.
fn spread_rank(rank: u64, ranks: i128, count: i128, s: &mut Stream) -> i128 {
    if ranks >= count {
        return rank as i128 % count;
    }
    let lo = rank as i128 * count / ranks;
    let hi = (rank as i128 + 1) * count / ranks - 1;
    s.int_in(lo, hi.max(lo))
}

/// The largest value of the column's float type below `x`.
fn next_down(x: f64, ty: ElemType) -> f64 {
    if ty == ElemType::F32 {
        let f = x as f32;
        let b = f.to_bits();
        let below = if f > 0.0 {
            f32::from_bits(b - 1)
        } else if f == 0.0 {
            -f32::from_bits(1)
        } else {
            f32::from_bits(b + 1)
        };
        f64::from(below)
    } else {
        let b = x.to_bits();
        if x > 0.0 {
            f64::from_bits(b - 1)
        } else if x == 0.0 {
            -f64::from_bits(1)
        } else {
            f64::from_bits(b + 1)
        }
    }
}

/// Converts and appends; integers are clamped to the type range `[tmin, tmax]`, floats
/// rounded to nearest.
fn push(data: &mut ColumnData, v: V, tmin: i128, tmax: i128) {
    let int = || match v {
        V::I(i) => i.clamp(tmin, tmax),
        V::F(f) => (libm::round(f) as i128).clamp(tmin, tmax),
    };
    let float = || match v {
        V::I(i) => i as f64,
        V::F(f) => f,
    };
    match data {
        ColumnData::U8(x) => x.push(int() as u8),
        ColumnData::U16(x) => x.push(int() as u16),
        ColumnData::U32(x) => x.push(int() as u32),
        ColumnData::U64(x) => x.push(int() as u64),
        ColumnData::I8(x) => x.push(int() as i8),
        ColumnData::I16(x) => x.push(int() as i16),
        ColumnData::I32(x) => x.push(int() as i32),
        ColumnData::I64(x) => x.push(int() as i64),
        ColumnData::F32(x) => x.push(float() as f32),
        ColumnData::F64(x) => x.push(float()),
    }
}
