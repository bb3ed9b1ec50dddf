//! k-bit feature codes (k = 1, 2, 4, 8): the scaling rule that turns a feature into a
//! code and a code back into the `f32` value training reads, and the packing of one
//! record's codes.
//!
//! Feature j has a range [lo_j, hi_j] (given as `f32`) and the step
//! `step_j = (hi_j − lo_j) / (2^k − 1)`: one `f32` subtraction, then one `f32` division.
//! Code q of feature j means `x = lo_j + q·step_j`: the code converted to `f32` (exact),
//! one `f32` multiplication, then one `f32` addition. The code of a value v is
//! `clamp(rne((v − lo_j) / step_j), 0, 2^k − 1)`: one `f32` subtraction, one `f32` division,
//! rounding to the nearest integer with ties to even. Every operation is one IEEE
//! round-to-nearest-even operation without fused multiply-add, so hardware copies it bit
//! for bit. A range is accepted only when every code's value codes back to that code, so
//! codes and values are one-to-one and re-coding a dequantised dataset changes nothing.

use ndarray::Array2;

use super::params::{SgdData, SgdError};

/// What happens to a value outside its feature's range [lo, hi].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outside {
    /// Takes the nearest end code (0 or 2^k − 1) and is counted.
    Clamp,
    /// Is an error naming the row, the feature and the value.
    Refuse,
}

/// The scaling of every feature for k-bit codes.
#[derive(Debug, Clone, PartialEq)]
pub struct Quant {
    bits: u32,
    lo: Vec<f32>,
    hi: Vec<f32>,
    step: Vec<f32>,
    outside: Outside,
}

/// A dataset with every feature replaced by its code's value.
#[derive(Debug, Clone, PartialEq)]
pub struct Quantised {
    /// The dequantised dataset (labels unchanged).
    pub data: SgdData,
    /// Features outside their range, clamped to an end code.
    pub clamped: u64,
}

impl Quant {
    /// The scaling of `lo.len()` features with k = `bits` and per-feature ranges
    /// [`lo[j]`, `hi[j]`].
    pub fn new(bits: u32, lo: &[f32], hi: &[f32], outside: Outside) -> Result<Quant, String> {
        if ![1, 2, 4, 8].contains(&bits) {
            return Err(format!("bits = {bits} (expected 1, 2, 4 or 8)"));
        }
        if lo.len() != hi.len() {
            return Err(format!("{} lo values for {} hi values", lo.len(), hi.len()));
        }
        let levels = ((1u32 << bits) - 1) as f32;
        let step: Vec<f32> = lo.iter().zip(hi).map(|(&l, &h)| (h - l) / levels).collect();
        let q = Quant {
            bits,
            lo: lo.to_vec(),
            hi: hi.to_vec(),
            step,
            outside,
        };
        for j in 0..q.dims() {
            let (l, h, s) = (q.lo[j], q.hi[j], q.step[j]);
            if !(l.is_finite() && h.is_finite() && h > l) {
                return Err(format!(
                    "feature {j}: range [{l}, {h}] needs finite lo < hi"
                ));
            }
            if !s.is_finite() {
                return Err(format!(
                    "feature {j}: step (hi − lo)/{levels} overflows f32"
                ));
            }
            if let Some(c) = (0..=q.max_code()).find(|&c| q.code(j, q.value(j, c)) != c) {
                return Err(format!(
                    "feature {j}: range [{l}, {h}] is too narrow for its magnitude: code {c} dequantises to {}, which codes to {}",
                    q.value(j, c),
                    q.code(j, q.value(j, c))
                ));
            }
        }
        Ok(q)
    }

    /// k, the bits per code.
    pub fn bits(&self) -> u32 {
        self.bits
    }

    /// Features.
    pub fn dims(&self) -> usize {
        self.lo.len()
    }

    /// lo of every feature.
    pub fn lo(&self) -> &[f32] {
        &self.lo
    }

    /// hi of every feature.
    pub fn hi(&self) -> &[f32] {
        &self.hi
    }

    /// step of every feature.
    pub fn step(&self) -> &[f32] {
        &self.step
    }

    /// The largest code, 2^k − 1.
    pub fn max_code(&self) -> u8 {
        ((1u32 << self.bits) - 1) as u8
    }

    /// Bytes of one record's codes: d·k bits rounded up to whole bytes.
    pub fn code_bytes(&self) -> u64 {
        (self.dims() as u64 * u64::from(self.bits)).div_ceil(8)
    }

    /// The value of code `q` of feature `j`: lo + q·step.
    pub fn value(&self, j: usize, q: u8) -> f32 {
        self.lo[j] + f32::from(q) * self.step[j]
    }

    /// The code of `v` as feature `j`: the nearest code, ties to even, clamped to the end
    /// codes (a NaN gets code 0; [`Quant::quantise`] refuses it first).
    pub fn code(&self, j: usize, v: f32) -> u8 {
        let t = ((v - self.lo[j]) / self.step[j]).round_ties_even();
        // `as` saturates to 0..=255 (NaN to 0); the min keeps k < 8 within its codes.
        (t as u8).min(self.max_code())
    }

    /// Appends one record's codes of `features`, LSB-first: code j in bits j·k … j·k + k − 1
    /// of the little-endian bit string, the last byte zero-filled.
    pub fn pack(&self, features: impl Iterator<Item = f32>, out: &mut Vec<u8>) {
        let codes: Vec<u8> = features.enumerate().map(|(j, v)| self.code(j, v)).collect();
        crate::table::pack_sub_byte(&codes, self.bits, out);
    }

    /// `data` with every feature replaced by its code's value; a feature that is not
    /// finite, or outside its range under [`Outside::Refuse`], is an error.
    pub fn quantise(&self, data: &SgdData) -> Result<Quantised, SgdError> {
        self.check_dims(data)?;
        let mut clamped = 0;
        let mut x = Array2::<f32>::zeros(data.features.raw_dim());
        for ((r, j), &v) in data.features.indexed_iter() {
            if !v.is_finite() {
                return Err(SgdError::NotFinite {
                    row: r,
                    column: j,
                    value: v,
                });
            }
            if v < self.lo[j] || v > self.hi[j] {
                if self.outside == Outside::Refuse {
                    return Err(SgdError::Param(format!(
                        "row {r}, feature {j}: {v} is outside the code range [{}, {}]",
                        self.lo[j], self.hi[j]
                    )));
                }
                clamped += 1;
            }
            x[[r, j]] = self.value(j, self.code(j, v));
        }
        Ok(Quantised {
            data: SgdData {
                features: x,
                labels: data.labels.clone(),
            },
            clamped,
        })
    }

    /// Checks that every feature of `data` is the value of one of its codes (training data
    /// must be dequantised, so the record image and training see the same numbers).
    pub fn check(&self, data: &SgdData) -> Result<(), SgdError> {
        self.check_dims(data)?;
        for ((r, j), &v) in data.features.indexed_iter() {
            if self.value(j, self.code(j, v)).to_bits() != v.to_bits() {
                return Err(SgdError::Param(format!(
                    "row {r}, feature {j}: {v} is not the value of a {}-bit code; quantise the data first",
                    self.bits
                )));
            }
        }
        Ok(())
    }

    fn check_dims(&self, data: &SgdData) -> Result<(), SgdError> {
        if data.dims() == self.dims() {
            Ok(())
        } else {
            Err(SgdError::FeatureCount {
                data: data.dims(),
                expected: self.dims(),
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{arr1, arr2};
    use proptest::prelude::*;

    fn quant(bits: u32, lo: f32, hi: f32, d: usize) -> Quant {
        Quant::new(bits, &vec![lo; d], &vec![hi; d], Outside::Clamp).expect("a good range")
    }

    fn packed(q: &Quant, v: &[f32]) -> Vec<u8> {
        let mut out = Vec::new();
        q.pack(v.iter().copied(), &mut out);
        out
    }

    #[test]
    fn scaling_and_packing_match_the_worked_example() {
        // Worked example, k = 4 over [−1, 2]: step = 3/15 is one correctly rounded f32
        // division, the f32 nearest 0.2 (0x3E4CCCCD). Code 7 is −1 + fl(7·step):
        // 7·0.200000003 = 1.4000000209 lies nearer 0x3FB33333 = 1.3999999762 than
        // 0x3FB33334 = 1.4000000954, and −1 + 1.3999999762 = 0.3999999762 (0x3ECCCCCC)
        // is exact.
        let q = quant(4, -1.0, 2.0, 3);
        assert_eq!(q.step()[0].to_bits(), 0x3E4C_CCCD);
        assert_eq!(q.value(0, 7).to_bits(), 0x3ECC_CCCC);
        // (0.45 + 1)/step = 7.25 → 7; 5.0 is beyond hi → 15; −1 → 0.
        assert_eq!(
            [q.code(0, -1.0), q.code(1, 0.45), q.code(2, 5.0)],
            [0, 7, 15]
        );
        // LSB-first: code 0 in bits 0–3 of byte 0, code 1 in bits 4–7, code 2 in byte 1.
        assert_eq!(packed(&q, &[-1.0, 0.45, 5.0]), [0x70, 0x0F]);
        assert_eq!(q.code_bytes(), 2);

        // Worked example, k = 2 over [0, 3] (step 1): codes 3 0 1 2 3 fill bit pairs from
        // bit 0: 0b10_01_00_11 = 0x93, then 0b11 in the second byte.
        let q = quant(2, 0.0, 3.0, 5);
        assert_eq!(packed(&q, &[3.0, 0.0, 1.0, 2.0, 2.6]), [0x93, 0x03]);
        // Worked example, k = 1 over [0, 1]: bits 1 0 1 1 0 0 0 1 | 1 → 0x8D, 0x01.
        let q = quant(1, 0.0, 1.0, 9);
        let v = [1.0, 0.0, 0.7, 0.9, 0.2, -3.0, 0.4, 1.0, 8.0];
        assert_eq!(packed(&q, &v), [0x8D, 0x01]);
        // Worked example, k = 8 over [0, 255] (step 1): 200.4 → 200 = 0xC8.
        let q = quant(8, 0.0, 255.0, 2);
        assert_eq!(packed(&q, &[200.4, 0.5]), [0xC8, 0x00]);
    }

    #[test]
    fn ties_go_to_the_even_code() {
        // Step 1 over [0, 15]: 2.5 → 2, 3.5 → 4, 0.5 → 0 (worked example).
        let q = quant(4, 0.0, 15.0, 1);
        assert_eq!([q.code(0, 2.5), q.code(0, 3.5), q.code(0, 0.5)], [2, 4, 0]);
    }

    #[test]
    fn bad_scalings_are_refused() {
        let err =
            |bits, lo: f32, hi: f32| Quant::new(bits, &[lo], &[hi], Outside::Clamp).unwrap_err();
        assert!(err(3, 0.0, 1.0).contains("bits = 3"));
        assert!(err(4, 1.0, 1.0).contains("needs finite lo < hi"));
        assert!(err(4, 2.0, 1.0).contains("needs finite lo < hi"));
        assert!(err(4, f32::NAN, 1.0).contains("needs finite lo < hi"));
        assert!(err(1, -3e38, 3e38).contains("overflows f32"));
        // 16 codes cannot be told apart within a few ulps of 1e6.
        assert!(err(4, 1e6, 1e6 + 0.25).contains("too narrow"));
    }

    #[test]
    fn outside_values_clamp_or_are_refused() {
        let data = SgdData {
            features: arr2(&[[-2.0f32, 0.5], [0.25, 9.0]]),
            labels: arr1(&[1.0, 0.0]),
        };
        let q = quant(2, 0.0, 1.5, 2);
        let out = q.quantise(&data).expect("clamps");
        assert_eq!(out.clamped, 2);
        assert_eq!(out.data.features, arr2(&[[0.0f32, 0.5], [0.0, 1.5]]));
        assert_eq!(out.data.labels, data.labels);
        let strict = Quant::new(2, &[0.0; 2], &[1.5; 2], Outside::Refuse).expect("range");
        let e = strict.quantise(&data).unwrap_err().to_string();
        assert_eq!(e, "row 0, feature 0: -2 is outside the code range [0, 1.5]");
        let mut nan = data.clone();
        nan.features[[1, 1]] = f32::NAN;
        assert!(matches!(
            q.quantise(&nan),
            Err(SgdError::NotFinite {
                row: 1,
                column: 1,
                ..
            })
        ));
        assert!(q.check(&data).is_err());
        q.check(&out.data)
            .expect("dequantised data holds code values");
    }

    fn scaling() -> impl Strategy<Value = Quant> {
        (
            prop::sample::select(vec![1u32, 2, 4, 8]),
            prop::collection::vec((-1000.0f32..1000.0, 0.01f32..2000.0), 1..6),
        )
            .prop_filter_map("a range wide enough for its codes", |(bits, r)| {
                let lo: Vec<f32> = r.iter().map(|x| x.0).collect();
                let hi: Vec<f32> = r.iter().map(|x| x.0 + x.1).collect();
                Quant::new(bits, &lo, &hi, Outside::Clamp).ok()
            })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(256))]

        #[test]
        fn codes_and_values_round_trip(q in scaling(), u in prop::collection::vec(-0.2f64..1.2, 6)) {
            let (max, levels) = (q.max_code(), f64::from(q.max_code()));
            for (j, &uj) in u.iter().enumerate().take(q.dims()) {
                for c in 0..=max {
                    prop_assert_eq!(q.code(j, q.value(j, c)), c);
                }
                let (lo, hi, step) = (q.lo()[j], q.hi()[j], f64::from(q.step()[j]));
                let mag = f64::from(lo.abs().max(hi.abs()));
                // Two f32 roundings in (v − lo)/step move t by at most 2^k·2^−23 ≤ 2^−15,
                // and lo + q·step is within one f32 ulp of its exact value.
                let slack = step * 2f64.powi(-14) + 2.0 * mag * 2f64.powi(-23);
                let v = (f64::from(lo) + uj * (f64::from(hi) - f64::from(lo))) as f32;
                let c = q.code(j, v);
                let err = (f64::from(q.value(j, c)) - f64::from(v)).abs();
                if v >= lo && v <= hi {
                    prop_assert!(err <= step / 2.0 + slack, "v {v} code {c} err {err} step {step}");
                }
                // No other code is nearer (beyond the slack).
                for other in [c.saturating_sub(1), c.saturating_add(1).min(max)] {
                    let e2 = (f64::from(q.value(j, other)) - f64::from(v)).abs();
                    prop_assert!(err <= e2 + slack, "code {c} vs {other} for {v}");
                }
                if v < lo {
                    prop_assert_eq!(c, 0);
                }
                if v > hi {
                    prop_assert_eq!(f64::from(c), levels);
                }
            }
        }

        #[test]
        fn quantising_dequantised_data_changes_nothing(
            q in scaling(),
            rows in prop::collection::vec(prop::collection::vec(-2000.0f32..3000.0, 6), 1..8),
        ) {
            let d = q.dims();
            let n = rows.len();
            let flat: Vec<f32> = rows.iter().flat_map(|r| r[..d].to_vec()).collect();
            let data = SgdData {
                features: Array2::from_shape_vec((n, d), flat).expect("shape"),
                labels: ndarray::Array1::zeros(n),
            };
            let once = q.quantise(&data).expect("finite");
            q.check(&once.data).expect("code values");
            let twice = q.quantise(&once.data).expect("finite");
            prop_assert_eq!(&twice.data, &once.data);
            for (r, row) in data.features.rows().into_iter().enumerate() {
                let (a, b) = (packed(&q, row.as_slice().unwrap()), packed(&q, once.data.features.row(r).as_slice().unwrap()));
                prop_assert_eq!(a, b);
            }
        }
    }
}
