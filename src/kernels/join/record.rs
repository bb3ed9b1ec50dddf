//! Output records: the layout a variant produces and the writer that packs fields.
//!
//! A record is its fields packed little-endian in layout order, no padding. Inner joins
//! write the fields the job lists; a semi-join writes the `u64` probe row id; count-only
//! writes one `u64` record holding the number of matching pairs. Records are written one
//! at a time (the nested-loop oracle) or a batch at a time (the engine driver); both give
//! the same bytes.

use super::error::JoinError;
use super::params::{OutField, Variant};
use crate::table::ElemType;

/// Names and types of a record's fields, in order.
pub type RecordLayout = Vec<(String, ElemType)>;

/// Packs one variant's records.
#[derive(Debug, Clone)]
pub struct RecordWriter {
    /// Per field: its source and byte width.
    fields: Vec<(OutField, usize)>,
    layout: RecordLayout,
    record_bytes: usize,
}

/// The most fields a record has: each of the four sources at most once.
const MAX_FIELDS: usize = 4;

/// The most records [`RecordWriter::write_batch`] packs in one call.
pub const BATCH: usize = 256;

/// A field's index into `[row, key, probe payload, build payload]`.
fn source(f: OutField) -> usize {
    match f {
        OutField::ProbeRowId => 0,
        OutField::Key => 1,
        OutField::ProbePayload => 2,
        OutField::BuildPayload => 3,
    }
}

/// An inner join's fields: at least one, none twice (a record's field names are its
/// columns).
pub fn check_fields(fields: &[OutField]) -> Result<(), JoinError> {
    if fields.is_empty() {
        return Err(JoinError::Shape(
            "no fields (an inner join writes at least one)".into(),
        ));
    }
    match fields
        .iter()
        .enumerate()
        .find(|(i, f)| fields[..*i].contains(f))
    {
        Some((_, f)) => Err(JoinError::Shape(format!("`{}` is listed twice", f.name()))),
        None => Ok(()),
    }
}

impl RecordWriter {
    /// The writer for `variant` with the given key and payload types; an inner join must
    /// list at least one field and none twice.
    pub fn new(
        variant: &Variant,
        key: ElemType,
        probe_pay: ElemType,
        build_pay: ElemType,
    ) -> Result<Self, JoinError> {
        let fields: Vec<OutField> = match variant {
            Variant::Inner(f) => f.clone(),
            Variant::Semi => vec![OutField::ProbeRowId],
            Variant::Count => Vec::new(),
        };
        if let Variant::Inner(f) = variant {
            check_fields(f)?;
        }
        let ty = |f: OutField| match f {
            OutField::ProbeRowId => ElemType::U64,
            OutField::Key => key,
            OutField::ProbePayload => probe_pay,
            OutField::BuildPayload => build_pay,
        };
        let mut layout: RecordLayout = fields
            .iter()
            .map(|&f| (f.name().to_string(), ty(f)))
            .collect();
        if matches!(variant, Variant::Count) {
            layout.push(("count".into(), ElemType::U64));
        }
        Ok(RecordWriter {
            fields: fields
                .iter()
                .map(|&f| (f, (ty(f).bits() / 8) as usize))
                .collect(),
            record_bytes: layout.iter().map(|(_, t)| (t.bits() / 8) as usize).sum(),
            layout,
        })
    }

    /// Field names and types.
    pub fn layout(&self) -> &RecordLayout {
        &self.layout
    }

    /// Bytes per record.
    pub fn record_bytes(&self) -> u64 {
        self.record_bytes as u64
    }

    /// Appends the record of one match.
    #[inline(always)]
    pub fn write(&self, out: &mut Vec<u8>, row: u64, key: u64, probe_pay: u64, build_pay: u64) {
        let src = [row, key, probe_pay, build_pay];
        // Every field is stored as 8 bytes and the offset advances by its width, so a
        // record is packed without a branch per width; the slack word takes the tail.
        let mut rec = [0u8; 8 * (MAX_FIELDS + 1)];
        let mut at = 0;
        for &(f, w) in &self.fields {
            rec[at..at + 8].copy_from_slice(&src[source(f)].to_le_bytes());
            at += w;
        }
        // A copy of constant length is inlined; a variable one is a call per record.
        match at {
            4 => put::<4>(out, &rec),
            8 => put::<8>(out, &rec),
            12 => put::<12>(out, &rec),
            16 => put::<16>(out, &rec),
            20 => put::<20>(out, &rec),
            24 => put::<24>(out, &rec),
            28 => put::<28>(out, &rec),
            _ => out.extend_from_slice(&rec[..at]),
        }
    }

    /// Appends the records of `n` (at most [`BATCH`]) matches, packed a field at a time:
    /// `fill(field, values)` sets `values[i]` to the field's value in record `i`. One
    /// loop per field over the whole batch keeps the step per record a plain store, with
    /// no dispatch on field or width.
    #[inline]
    pub fn write_batch(
        &self,
        out: &mut Vec<u8>,
        n: usize,
        mut fill: impl FnMut(OutField, &mut [u64]),
    ) {
        assert!(n <= BATCH, "{n} records in one batch");
        let rb = self.record_bytes;
        // Packed in cache, then appended a line at a time with streaming stores.
        let mut stage = [0u8; BATCH * 8 * MAX_FIELDS];
        let recs = &mut stage[..n * rb];
        let mut values = [0u64; BATCH];
        let mut off = 0;
        for &(f, w) in &self.fields {
            fill(f, &mut values[..n]);
            match w {
                4 => pack::<4>(recs, rb, off, &values[..n]),
                8 => pack::<8>(recs, rb, off, &values[..n]),
                w => unreachable!("fields are 4 or 8 bytes, not {w}"),
            }
            off += w;
        }
        crate::kernels::hints::extend_streaming(out, recs);
    }
}

/// Stores the low `W` bytes of each value at byte `off` of successive `rb`-byte records.
#[inline(always)]
fn pack<const W: usize>(recs: &mut [u8], rb: usize, off: usize, values: &[u64]) {
    for (rec, v) in recs.chunks_exact_mut(rb).zip(values) {
        rec[off..off + W].copy_from_slice(&v.to_le_bytes()[..W]);
    }
}

#[inline(always)]
fn put<const N: usize>(out: &mut Vec<u8>, rec: &[u8]) {
    out.extend_from_slice(&rec[..N]);
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A value per field and record, with high bits set so narrow fields show truncation.
    fn value(f: OutField, i: usize) -> u64 {
        (source(f) as u64 + 1) * 0x1111_1111_0000_0000 + (i as u64) * 0x0101_0101 + 3
    }

    #[test]
    fn a_batch_packs_what_records_one_at_a_time_would() {
        use OutField::*;
        let layouts = [
            vec![ProbeRowId, Key, ProbePayload, BuildPayload],
            vec![ProbePayload, BuildPayload],
            vec![BuildPayload, Key],
            vec![Key],
        ];
        for fields in &layouts {
            for ty in [ElemType::U32, ElemType::U64] {
                let w = RecordWriter::new(&Variant::Inner(fields.clone()), ty, ty, ty).unwrap();
                for n in [0, 1, 3, 63, BATCH] {
                    // Five bytes already held, so the records start off a line boundary.
                    let mut one = vec![7u8; 5];
                    for i in 0..n {
                        let v = |f| value(f, i);
                        w.write(
                            &mut one,
                            v(ProbeRowId),
                            v(Key),
                            v(ProbePayload),
                            v(BuildPayload),
                        );
                    }
                    let mut batch = vec![7u8; 5];
                    w.write_batch(&mut batch, n, |f, vals| {
                        for (i, x) in vals.iter_mut().enumerate() {
                            *x = value(f, i);
                        }
                    });
                    assert_eq!(batch, one, "{fields:?} {ty:?} n = {n}");
                }
            }
        }
    }
}
