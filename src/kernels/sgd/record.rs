//! The dataset image of the SGD engines: per record the d features then the label,
//! little-endian (`f32` for the float modes, Q_d integers for fixed point), packed or
//! zero-padded to whole words.

use super::fixed;
use super::params::{Numeric, SgdData, SgdParams};

/// Bytes of one element of the dataset image.
pub(super) fn elem_bytes(n: &Numeric) -> u64 {
    match n {
        Numeric::Fixed(s) => u64::from(fixed::storage_bits(s.data) / 8),
        _ => 4,
    }
}

/// (payload, stride) bytes of one record: d features and the label, padded to whole
/// words when `pad`.
pub(super) fn record_shape(d: usize, p: &SgdParams, word_bytes: u64) -> (u64, u64) {
    let payload = (d as u64 + 1) * elem_bytes(&p.numeric);
    let stride = if p.pad_records {
        payload.div_ceil(word_bytes) * word_bytes
    } else {
        payload
    };
    (payload, stride)
}

/// The dataset image: per record the d features then the label, little-endian (`f32`
/// for the float modes, Q_d integers for fixed point), zero padding to whole words when
/// the job pads records.
pub fn record_bytes(data: &SgdData, p: &SgdParams, word_bytes: u64) -> Vec<u8> {
    let (payload, stride) = record_shape(data.dims(), p, word_bytes);
    let mut out = Vec::with_capacity(data.rows() * stride as usize);
    let mut none = 0;
    for (row, &y) in data.features.rows().into_iter().zip(data.labels.iter()) {
        let start = out.len();
        for v in row.iter().chain(std::iter::once(&y)) {
            match &p.numeric {
                Numeric::Fixed(s) => {
                    let q = fixed::from_real(
                        f64::from(*v),
                        s.data.frac_bits,
                        fixed::width(s.data),
                        &mut none,
                    );
                    out.extend_from_slice(&q.to_le_bytes()[..elem_bytes(&p.numeric) as usize]);
                }
                _ => out.extend_from_slice(&v.to_le_bytes()),
            }
        }
        debug_assert_eq!((out.len() - start) as u64, payload);
        out.resize(start + stride as usize, 0);
    }
    out
}
