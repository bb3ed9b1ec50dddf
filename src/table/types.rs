//! Element types: the closed set of value types a column may hold, and the `Elem` trait
//! that lets generic code move values to and from little-endian bytes and text.
//!
//! Sub-byte types (`u1`, `u2`, `u4`) are held one value per `u8` in memory and packed
//! LSB-first only when written to a byte stream (see [`crate::table::pack_sub_byte`]).

use std::fmt;
use std::str::FromStr;

/// The type of one column's elements.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ElemType {
    /// 1-bit unsigned, packed 8 to a byte.
    U1,
    /// 2-bit unsigned, packed 4 to a byte.
    U2,
    /// 4-bit unsigned, packed 2 to a byte.
    U4,
    U8,
    U16,
    U32,
    U64,
    I8,
    I16,
    I32,
    I64,
    F32,
    F64,
}

impl ElemType {
    /// Every type, in a fixed order (used by tests and help text).
    pub const ALL: [ElemType; 13] = [
        ElemType::U1,
        ElemType::U2,
        ElemType::U4,
        ElemType::U8,
        ElemType::U16,
        ElemType::U32,
        ElemType::U64,
        ElemType::I8,
        ElemType::I16,
        ElemType::I32,
        ElemType::I64,
        ElemType::F32,
        ElemType::F64,
    ];

    /// Width of one element in bits.
    pub fn bits(self) -> u32 {
        match self {
            ElemType::U1 => 1,
            ElemType::U2 => 2,
            ElemType::U4 => 4,
            ElemType::U8 | ElemType::I8 => 8,
            ElemType::U16 | ElemType::I16 => 16,
            ElemType::U32 | ElemType::I32 | ElemType::F32 => 32,
            ElemType::U64 | ElemType::I64 | ElemType::F64 => 64,
        }
    }

    /// True for the packed sub-byte types.
    pub fn is_sub_byte(self) -> bool {
        self.bits() < 8
    }

    /// True for `f32` and `f64`.
    pub fn is_float(self) -> bool {
        matches!(self, ElemType::F32 | ElemType::F64)
    }

    /// True for the signed integer types.
    pub fn is_signed_int(self) -> bool {
        matches!(
            self,
            ElemType::I8 | ElemType::I16 | ElemType::I32 | ElemType::I64
        )
    }

    /// An integer type's range as (min, max); for floats (0, 0).
    pub fn int_range(self) -> (i128, i128) {
        let b = self.bits();
        if self.is_float() {
            (0, 0)
        } else if self.is_signed_int() {
            (-(1i128 << (b - 1)), (1i128 << (b - 1)) - 1)
        } else {
            (0, (1i128 << b) - 1)
        }
    }

    /// The name used in job files, CSV headers and the manifest.
    pub fn name(self) -> &'static str {
        match self {
            ElemType::U1 => "u1",
            ElemType::U2 => "u2",
            ElemType::U4 => "u4",
            ElemType::U8 => "u8",
            ElemType::U16 => "u16",
            ElemType::U32 => "u32",
            ElemType::U64 => "u64",
            ElemType::I8 => "i8",
            ElemType::I16 => "i16",
            ElemType::I32 => "i32",
            ElemType::I64 => "i64",
            ElemType::F32 => "f32",
            ElemType::F64 => "f64",
        }
    }

    /// The NumPy `descr` string for a 1-D array of this type. Sub-byte types are
    /// stored one value per byte (`|u1`) in `.npy` files, since NumPy has no packed dtype.
    pub fn npy_descr(self) -> &'static str {
        match self {
            ElemType::U1 | ElemType::U2 | ElemType::U4 | ElemType::U8 => "|u1",
            ElemType::U16 => "<u2",
            ElemType::U32 => "<u4",
            ElemType::U64 => "<u8",
            ElemType::I8 => "|i1",
            ElemType::I16 => "<i2",
            ElemType::I32 => "<i4",
            ElemType::I64 => "<i8",
            ElemType::F32 => "<f4",
            ElemType::F64 => "<f8",
        }
    }

    /// Inverse of [`ElemType::npy_descr`] for whole-byte types.
    pub fn from_npy_descr(descr: &str) -> Option<ElemType> {
        let t = match descr {
            "|u1" | "<u1" | "u1" => ElemType::U8,
            "<u2" => ElemType::U16,
            "<u4" => ElemType::U32,
            "<u8" => ElemType::U64,
            "|i1" | "<i1" | "i1" => ElemType::I8,
            "<i2" => ElemType::I16,
            "<i4" => ElemType::I32,
            "<i8" => ElemType::I64,
            "<f4" => ElemType::F32,
            "<f8" => ElemType::F64,
            _ => return None,
        };
        Some(t)
    }
}

impl fmt::Display for ElemType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for ElemType {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        ElemType::ALL
            .iter()
            .copied()
            .find(|t| t.name() == s)
            .ok_or_else(|| {
                format!("unknown element type `{s}` (expected one of u1 u2 u4 u8 u16 u32 u64 i8 i16 i32 i64 f32 f64)")
            })
    }
}

impl serde::Serialize for ElemType {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.name())
    }
}

impl<'de> serde::Deserialize<'de> for ElemType {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        s.parse().map_err(serde::de::Error::custom)
    }
}

/// A Rust scalar that can be a column element. Implemented for the ten native types;
/// sub-byte columns use `u8` with a narrower [`ElemType`].
pub trait Elem: Copy + Send + Sync + PartialEq + PartialOrd + fmt::Debug + 'static {
    /// The whole-byte column type this Rust type stands for.
    const TYPE: ElemType;
    /// Bytes of one element.
    const BYTES: usize;
    /// Appends the little-endian bytes of `self`.
    fn put_le(self, out: &mut Vec<u8>);
    /// Reads one value from exactly `BYTES` little-endian bytes.
    fn get_le(b: &[u8]) -> Self;
    /// Parses decimal text (for floats also `nan`, `inf`, `-inf`).
    fn parse_text(s: &str) -> Option<Self>;
    /// The value as `f64` (exact for every integer below 2^53).
    fn to_f64(self) -> f64;
}

macro_rules! impl_elem {
    ($t:ty, $e:expr) => {
        impl Elem for $t {
            const TYPE: ElemType = $e;
            const BYTES: usize = std::mem::size_of::<$t>();
            #[inline]
            fn put_le(self, out: &mut Vec<u8>) {
                out.extend_from_slice(&self.to_le_bytes());
            }
            #[inline]
            fn get_le(b: &[u8]) -> Self {
                let mut a = [0u8; std::mem::size_of::<$t>()];
                a.copy_from_slice(&b[..std::mem::size_of::<$t>()]);
                <$t>::from_le_bytes(a)
            }
            fn parse_text(s: &str) -> Option<Self> {
                s.trim().parse::<$t>().ok()
            }
            #[inline]
            fn to_f64(self) -> f64 {
                self as f64
            }
        }
    };
}

impl_elem!(u8, ElemType::U8);
impl_elem!(u16, ElemType::U16);
impl_elem!(u32, ElemType::U32);
impl_elem!(u64, ElemType::U64);
impl_elem!(i8, ElemType::I8);
impl_elem!(i16, ElemType::I16);
impl_elem!(i32, ElemType::I32);
impl_elem!(i64, ElemType::I64);
impl_elem!(f32, ElemType::F32);
impl_elem!(f64, ElemType::F64);

/// Fixed-point metadata for a signed integer column: the stored integer `v` stands for
/// `v / 2^frac_bits`; `int_bits + frac_bits` (plus the sign bit) fit the storage type.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QFormat {
    /// Integer bits, not counting the sign.
    pub int_bits: u32,
    /// Fraction bits.
    pub frac_bits: u32,
}

impl QFormat {
    /// Checks that the format fits a signed storage type of `ty`.
    pub fn check(&self, ty: ElemType) -> Result<(), String> {
        if !ty.is_signed_int() {
            return Err(format!(
                "fixed-point Q{}.{} needs a signed integer column, not {ty}",
                self.int_bits, self.frac_bits
            ));
        }
        let need = u64::from(self.int_bits) + u64::from(self.frac_bits) + 1;
        if need > u64::from(ty.bits()) {
            return Err(format!(
                "Q{}.{} needs {need} bits with the sign, more than {ty} holds",
                self.int_bits, self.frac_bits
            ));
        }
        Ok(())
    }
}

impl fmt::Display for QFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Q{}.{}", self.int_bits, self.frac_bits)
    }
}
