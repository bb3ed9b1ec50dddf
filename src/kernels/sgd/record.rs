//! The dataset image of the SGD engines: per record the d features then the label,
//! little-endian (`f32` for the float modes, Q_d integers for fixed point, or k-bit codes
//! packed LSB-first into whole bytes followed by the `f32` label), packed or zero-padded to
//! whole words.

use super::fixed;
use super::params::{Numeric, SgdData, SgdParams};

/// Bytes of one element of the dataset image.
pub(super) fn elem_bytes(n: &Numeric) -> u64 {
    match n {
        Numeric::Fixed(s) => u64::from(fixed::storage_bits(s.data) / 8),
        _ => 4,
    }
}

/// Bytes of one record's (features, label) before padding.
pub(super) fn field_bytes(d: usize, p: &SgdParams) -> (u64, u64) {
    match &p.quant {
        // Codes never combine with fixed point, so the label is f32.
        Some(q) => (q.code_bytes(), 4),
        None => (d as u64 * elem_bytes(&p.numeric), elem_bytes(&p.numeric)),
    }
}

/// Bytes of one record before padding: d features and the label.
pub(super) fn payload_bytes(d: usize, p: &SgdParams) -> u64 {
    let (features, label) = field_bytes(d, p);
    features + label
}

/// (payload, stride) bytes of one record: d features and the label, padded to whole
/// words when `pad`.
pub(super) fn record_shape(d: usize, p: &SgdParams, word_bytes: u64) -> (u64, u64) {
    let payload = payload_bytes(d, p);
    let stride = if p.pad_records {
        payload.div_ceil(word_bytes) * word_bytes
    } else {
        payload
    };
    (payload, stride)
}

/// The dataset image: per record the d features then the label, little-endian (`f32`
/// for the float modes, Q_d integers for fixed point; with k-bit codes, each feature's
/// code packed LSB-first into whole bytes, then the `f32` label), zero padding to whole
/// words when the job pads records.
pub fn record_bytes(data: &SgdData, p: &SgdParams, word_bytes: u64) -> Vec<u8> {
    let (payload, stride) = record_shape(data.dims(), p, word_bytes);
    let mut out = Vec::with_capacity(data.rows() * stride as usize);
    let mut none = 0;
    for (row, &y) in data.features.rows().into_iter().zip(data.labels.iter()) {
        let start = out.len();
        let label = std::iter::once(&y);
        match (&p.quant, &p.numeric) {
            (Some(q), _) => {
                q.pack(row.iter().copied(), &mut out);
                out.extend_from_slice(&y.to_le_bytes());
            }
            (None, Numeric::Fixed(s)) => {
                for v in row.iter().chain(label) {
                    let q = fixed::from_real(
                        f64::from(*v),
                        s.data.frac_bits,
                        fixed::width(s.data),
                        &mut none,
                    );
                    out.extend_from_slice(&q.to_le_bytes()[..elem_bytes(&p.numeric) as usize]);
                }
            }
            (None, _) => row
                .iter()
                .chain(label)
                .for_each(|v| out.extend_from_slice(&v.to_le_bytes())),
        }
        debug_assert_eq!((out.len() - start) as u64, payload);
        out.resize(start + stride as usize, 0);
    }
    out
}
