//! Comparing floating-point records within a tolerance: a model trained by a hardware
//! float pipeline whose adder order differs from the golden one is close, not equal.
//!
//! Two elements agree when both are the same NaN-free value up to the tolerance:
//! - `Ulps(n)`: at most n representable values apart (±0 are 0 apart; a NaN never agrees);
//! - `Near { abs, rel }`: |found − expected| ≤ abs + rel·|expected|.
//!
//! Only outputs whose elements are all `f32` or all `f64` are compared this way; every
//! other output (fixed point, row ids, pairs) stays exact.

use serde::Serialize;

use super::shape::Shape;

/// How far a float may be from its golden value.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Tolerance {
    /// Units in the last place.
    Ulps(u64),
    /// Absolute plus relative bound.
    Near {
        /// Absolute part.
        abs: f64,
        /// Relative part (of the golden value's magnitude).
        rel: f64,
    },
}

/// Bytes per element of `shape` when every element is a float of one width.
pub fn float_width(shape: &Shape) -> Option<usize> {
    let of = |e: &str| match e {
        "f32" => Some(4),
        "f64" => Some(8),
        _ => None,
    };
    if shape.fields.is_empty() {
        return of(&shape.elem).filter(|&w| w as u64 == shape.rec);
    }
    let w = of(&shape.fields[0].elem)?;
    shape
        .fields
        .iter()
        .all(|f| of(&f.elem) == Some(w) && f.bits as usize == 8 * w)
        .then_some(w)
}

/// A float's bits as an integer that orders like the values (−0 and +0 both 0).
fn ordered_bits(bits: u64, width: usize) -> i128 {
    let sign = 1u64 << (8 * width - 1);
    let mag = i128::from(bits & (sign - 1));
    if bits & sign != 0 {
        -mag
    } else {
        mag
    }
}

fn value(bytes: &[u8]) -> (u64, f64) {
    match bytes.len() {
        4 => {
            let b = u32::from_le_bytes(bytes.try_into().expect("4 bytes"));
            (u64::from(b), f64::from(f32::from_bits(b)))
        }
        _ => {
            let b = u64::from_le_bytes(bytes.try_into().expect("8 bytes"));
            (b, f64::from_bits(b))
        }
    }
}

impl Tolerance {
    /// Whether one element `found` agrees with `want` (little-endian, same width).
    pub fn agrees(&self, want: &[u8], found: &[u8]) -> bool {
        let ((wb, w), (fb, f)) = (value(want), value(found));
        if w.is_nan() || f.is_nan() {
            return false;
        }
        match *self {
            Tolerance::Ulps(n) => {
                let d = ordered_bits(wb, want.len()) - ordered_bits(fb, want.len());
                d.unsigned_abs() <= u128::from(n)
            }
            Tolerance::Near { abs, rel } => {
                if w.is_infinite() || f.is_infinite() {
                    return w == f;
                }
                (f - w).abs() <= abs + rel * w.abs()
            }
        }
    }

    /// The elements of one record outside the tolerance, as `name=value` pairs for the
    /// golden and the device record; `None` when every element agrees.
    pub fn differences(
        &self,
        shape: &Shape,
        width: usize,
        want: &[u8],
        found: &[u8],
    ) -> Option<(String, String)> {
        let (mut e, mut g) = (Vec::new(), Vec::new());
        for (i, (w, f)) in want.chunks(width).zip(found.chunks(width)).enumerate() {
            if !self.agrees(w, f) {
                let name = shape.fields.get(i).map_or("", |s| s.name.as_str());
                let show = |b: &[u8]| {
                    let v = value(b).1;
                    if name.is_empty() {
                        format!("{v:e}")
                    } else {
                        format!("{name}={v:e}")
                    }
                };
                e.push(show(w));
                g.push(show(f));
            }
        }
        (!e.is_empty()).then(|| (e.join(" "), g.join(" ")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn f32b(v: f32) -> [u8; 4] {
        v.to_le_bytes()
    }

    #[test]
    fn ulps_count_representable_values_across_zero() {
        let t = Tolerance::Ulps(1);
        let one = 1.0f32;
        let next = f32::from_bits(one.to_bits() + 1);
        let after = f32::from_bits(one.to_bits() + 2);
        assert!(t.agrees(&f32b(one), &f32b(next)));
        assert!(!t.agrees(&f32b(one), &f32b(after)));
        // The smallest subnormals on either side of zero are two steps apart (−min, ±0, +min).
        let tiny = f32::from_bits(1);
        assert!(!t.agrees(&f32b(tiny), &f32b(-tiny)));
        assert!(Tolerance::Ulps(2).agrees(&f32b(tiny), &f32b(-tiny)));
        assert!(Tolerance::Ulps(0).agrees(&f32b(0.0), &f32b(-0.0)));
        assert!(!Tolerance::Ulps(u64::MAX).agrees(&f32b(f32::NAN), &f32b(f32::NAN)));
    }

    #[test]
    fn near_bounds_are_absolute_plus_relative() {
        let t = Tolerance::Near {
            abs: 0.0,
            rel: 1e-3,
        };
        let (a, b) = (1000.0f64.to_le_bytes(), 1000.9f64.to_le_bytes());
        assert!(t.agrees(&a, &b));
        assert!(!t.agrees(&a, &1001.1f64.to_le_bytes()));
        let t = Tolerance::Near { abs: 0.5, rel: 0.0 };
        assert!(t.agrees(&0.0f64.to_le_bytes(), &0.5f64.to_le_bytes()));
        assert!(!t.agrees(&0.0f64.to_le_bytes(), &0.51f64.to_le_bytes()));
        assert!(t.agrees(&f64::INFINITY.to_le_bytes(), &f64::INFINITY.to_le_bytes()));
        assert!(!t.agrees(&f64::INFINITY.to_le_bytes(), &f64::MAX.to_le_bytes()));
    }
}
