//! Output records: the layout a variant produces and the writer that packs fields.
//!
//! A record is its fields packed little-endian in layout order, no padding. Inner joins
//! write the fields the job lists; a semi-join writes the `u64` probe row id; count-only
//! writes one `u64` record holding the number of matching pairs.

use super::params::{OutField, Variant};
use crate::table::ElemType;

/// Names and types of a record's fields, in order.
pub type RecordLayout = Vec<(String, ElemType)>;

/// Packs one variant's records.
#[derive(Debug, Clone)]
pub struct RecordWriter {
    fields: Vec<(OutField, usize)>,
    layout: RecordLayout,
}

impl RecordWriter {
    /// The writer for `variant` with the given key and payload types.
    pub fn new(variant: &Variant, key: ElemType, probe_pay: ElemType, build_pay: ElemType) -> Self {
        let fields: Vec<OutField> = match variant {
            Variant::Inner(f) => f.clone(),
            Variant::Semi => vec![OutField::ProbeRowId],
            Variant::Count => Vec::new(),
        };
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
        RecordWriter {
            fields: fields
                .iter()
                .map(|&f| (f, (ty(f).bits() / 8) as usize))
                .collect(),
            layout,
        }
    }

    /// Field names and types.
    pub fn layout(&self) -> &RecordLayout {
        &self.layout
    }

    /// Bytes per record.
    pub fn record_bytes(&self) -> u64 {
        self.layout
            .iter()
            .map(|(_, t)| u64::from(t.bits() / 8))
            .sum()
    }

    /// Appends the record of one match.
    #[inline(always)]
    pub fn write(&self, out: &mut Vec<u8>, row: u64, key: u64, probe_pay: u64, build_pay: u64) {
        for &(f, w) in &self.fields {
            let v = match f {
                OutField::ProbeRowId => row,
                OutField::Key => key,
                OutField::ProbePayload => probe_pay,
                OutField::BuildPayload => build_pay,
            };
            out.extend_from_slice(&v.to_le_bytes()[..w]);
        }
    }
}
