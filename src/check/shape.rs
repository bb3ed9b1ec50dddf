//! The shape of one golden output as the checker sees it: record count and size, word
//! size, where the region lives on its channel, and the record's fields — plus rendering
//! a record's bytes as hex or as `name=value` fields.

use crate::manifest::FileEntry;

/// One field of a record: its name and bit span within the record.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FieldSpan {
    /// Name.
    pub name: String,
    /// First bit, counted from bit 0 of the record's first byte.
    pub bit: u32,
    /// Width in bits.
    pub bits: u32,
    /// Element type name (`u32`, `f32`, …).
    pub elem: String,
}

/// One golden output's layout.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Shape {
    /// Records.
    pub records: u64,
    /// Bytes per record; 0 for a bitmap (one bit per record).
    pub rec: u64,
    /// Bytes per memory word.
    pub word_bytes: u64,
    /// Words of the golden image.
    pub words: u64,
    /// Word address of the region on its channel.
    pub base_word: Option<u64>,
    /// Element label from the manifest (`u32`, `record`, `bits`).
    pub elem: String,
    /// Fields of a multi-field record; empty otherwise.
    pub fields: Vec<FieldSpan>,
}

impl Shape {
    /// The shape of golden entry `g` in a manifest of `word_bits`-bit words.
    pub fn of(g: &FileEntry, word_bits: u32) -> Result<Shape, String> {
        let bits = g.word_bits.unwrap_or(word_bits);
        if bits == 0 || !bits.is_multiple_of(8) || bits > 4096 {
            return Err(format!(
                "word_bits {bits} is not a whole number of bytes in 8..=4096"
            ));
        }
        let word_bytes = u64::from(bits / 8);
        let (records, rec) = (g.records.unwrap_or(0), g.record_bytes.unwrap_or(0));
        let payload = match rec {
            0 => Some(records.div_ceil(8)),
            _ => records.checked_mul(rec),
        };
        let payload = payload
            .filter(|&p| g.payload_bytes.is_none_or(|b| b == p))
            .ok_or_else(|| {
                format!(
                    "records {records} × record_bytes {rec} does not give its payload_bytes {}",
                    g.payload_bytes.map_or("?".into(), |b| b.to_string())
                )
            })?;
        let field_bits = g
            .fields
            .iter()
            .flatten()
            .try_fold(0u64, |a, f| a.checked_add(u64::from(f.bits)));
        if field_bits.is_some_and(|b| rec > 0 && b > rec * 8) || field_bits.is_none() {
            return Err(format!("its fields are wider than record_bytes {rec}"));
        }
        if g.words
            .is_some_and(|w| w.checked_mul(word_bytes).is_none_or(|b| b < payload))
        {
            return Err(format!(
                "words {} cannot hold payload_bytes {payload}",
                g.words.unwrap_or(0)
            ));
        }
        let mut bit = 0;
        let fields = g
            .fields
            .iter()
            .flatten()
            .map(|f| {
                let span = FieldSpan {
                    name: f.name.clone(),
                    bit,
                    bits: f.bits,
                    elem: f.elem.clone(),
                };
                bit += f.bits;
                span
            })
            .collect();
        Ok(Shape {
            records,
            rec,
            word_bytes,
            words: g.words.unwrap_or(0),
            base_word: g.base.map(|b| b / word_bytes),
            elem: g.elem.clone().unwrap_or_default(),
            fields,
        })
    }

    /// Bytes the records occupy (bitmap: whole bytes holding the bits).
    pub fn payload(&self) -> u64 {
        if self.rec == 0 {
            self.records.div_ceil(8)
        } else {
            self.records * self.rec
        }
    }

    /// Bytes of one element: the record for single-field records, else each field's
    /// width when all fields are equal whole bytes, else the record.
    pub fn elem_bytes(&self) -> u64 {
        let first = self.fields.first().map(|f| f.bits);
        match first {
            Some(b) if b % 8 == 0 && self.fields.iter().all(|f| f.bits == b) => u64::from(b / 8),
            _ => self.rec.max(1),
        }
    }

    /// The channel word address of region word `word`.
    pub fn channel_word(&self, word: u64) -> Option<u64> {
        self.base_word.map(|b| b + word)
    }

    /// A record's bytes as hex (most significant digit first), or as its fields.
    pub fn render(&self, bytes: &[u8]) -> String {
        if self.fields.is_empty() {
            return hex(bytes);
        }
        self.fields
            .iter()
            .map(|f| format!("{}={}", f.name, hex_bits(bytes, f.bit, f.bits)))
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// Little-endian bytes as `0x…`, most significant first, every byte shown.
pub fn hex(bytes: &[u8]) -> String {
    let mut s = String::with_capacity(2 + 2 * bytes.len());
    s.push_str("0x");
    for b in bytes.iter().rev() {
        s.push_str(&format!("{b:02x}"));
    }
    s
}

/// Bits `[bit, bit + bits)` of little-endian `bytes` as hex with as many digits as the width needs.
fn hex_bits(bytes: &[u8], bit: u32, bits: u32) -> String {
    let mut digits = Vec::new();
    let mut nibble = 0u8;
    for i in 0..bits {
        let at = bit + i;
        let v = (bytes.get((at / 8) as usize).copied().unwrap_or(0) >> (at % 8)) & 1;
        nibble |= v << (i % 4);
        if i % 4 == 3 || i + 1 == bits {
            digits.push(char::from_digit(u32::from(nibble), 16).expect("nibble"));
            nibble = 0;
        }
    }
    digits.reverse();
    format!("0x{}", digits.into_iter().collect::<String>())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_render_as_hex_or_fields() {
        let mut s = Shape {
            records: 1,
            rec: 6,
            word_bytes: 8,
            words: 1,
            base_word: Some(4),
            elem: "record".into(),
            fields: Vec::new(),
        };
        let b = [0xf6, 0xfe, 0x08, 0x00, 0x34, 0x12];
        assert_eq!(s.render(&b), "0x1234_0008fef6".replace('_', ""));
        s.fields = vec![
            FieldSpan {
                name: "ts".into(),
                bit: 0,
                bits: 32,
                elem: "u32".into(),
            },
            FieldSpan {
                name: "power".into(),
                bit: 32,
                bits: 16,
                elem: "u16".into(),
            },
        ];
        assert_eq!(s.render(&b), "ts=0x0008fef6 power=0x1234");
        assert_eq!(s.channel_word(3), Some(7));
        assert_eq!(hex_bits(&[0xab], 4, 4), "0xa");
    }
}
