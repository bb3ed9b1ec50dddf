//! The join's hash functions and the bucket index taken from a hash.
//!
//! A hash is `w` bits wide (`w` = the key width for multiplicative, MurmurHash3 and
//! identity, 32 for CRC-32C); the bucket index is its top or bottom `k` bits:
//!
//! ```text
//!   hash (w bits)  [ top k bits | ............ | bottom k bits ]
//!                     BucketPick::Top            BucketPick::Bottom
//! ```
//!
//! The default pick is the top bits: multiplicative hashing mixes upward, so its high
//! bits are the good ones (Knuth, TAOCP vol. 3, §6.4).

use serde::Serialize;

/// A hash function of the join, chosen per job.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum HashFn {
    /// Multiplicative (Fibonacci) hashing: key × ⌊2^w/φ⌋ mod 2^w.
    Fibonacci,
    /// The MurmurHash3 finaliser: `fmix32` for 32-bit keys, `fmix64` for 64-bit keys.
    Murmur,
    /// CRC-32C (Castagnoli) of the key's little-endian bytes.
    Crc32c,
    /// The key itself.
    Identity,
}

/// Which bits of the hash select the bucket.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum BucketPick {
    /// The top `k` bits (the default).
    Top,
    /// The bottom `k` bits.
    Bottom,
}

/// ⌊2^32/φ⌋, Knuth's multiplier for 32-bit multiplicative hashing (TAOCP vol. 3, §6.4).
pub const FIB32: u32 = 2_654_435_769;
/// ⌊2^64/φ⌋, the 64-bit multiplier of the same construction.
pub const FIB64: u64 = 11_400_714_819_323_198_485;

impl HashFn {
    /// The name used in job files and reports.
    pub fn name(self) -> &'static str {
        match self {
            HashFn::Fibonacci => "fibonacci",
            HashFn::Murmur => "murmur",
            HashFn::Crc32c => "crc32c",
            HashFn::Identity => "identity",
        }
    }

    /// The hash function called `name`.
    pub fn parse(name: &str) -> Option<HashFn> {
        [
            HashFn::Fibonacci,
            HashFn::Murmur,
            HashFn::Crc32c,
            HashFn::Identity,
        ]
        .into_iter()
        .find(|h| h.name() == name)
    }

    /// Bits of the hash of a key of `key_bits` bits (32 or 64).
    pub fn width(self, key_bits: u32) -> u32 {
        match self {
            HashFn::Crc32c => 32,
            _ => key_bits,
        }
    }

    /// The hash of `key` (a key of `key_bits` bits, 32 or 64), in the low `width` bits.
    #[inline]
    pub fn hash(self, key: u64, key_bits: u32) -> u64 {
        let narrow = key_bits == 32;
        match self {
            HashFn::Fibonacci if narrow => u64::from((key as u32).wrapping_mul(FIB32)),
            HashFn::Fibonacci => key.wrapping_mul(FIB64),
            HashFn::Murmur if narrow => u64::from(fmix32(key as u32)),
            HashFn::Murmur => fmix64(key),
            HashFn::Crc32c if narrow => u64::from(crc32c(&(key as u32).to_le_bytes())),
            HashFn::Crc32c => u64::from(crc32c(&key.to_le_bytes())),
            HashFn::Identity => key,
        }
    }
}

/// The bucket of a `width`-bit hash `h` among `2^k` buckets (`k <= width`).
#[inline]
pub fn bucket_of(h: u64, width: u32, k: u32, pick: BucketPick) -> u64 {
    if k == 0 {
        return 0;
    }
    match pick {
        BucketPick::Top => h >> (width - k),
        BucketPick::Bottom => h & ((1u64 << k) - 1),
    }
}

/// The 32-bit finaliser of MurmurHash3.
#[inline]
pub fn fmix32(mut h: u32) -> u32 {
    h ^= h >> 16;
    h = h.wrapping_mul(0x85eb_ca6b);
    h ^= h >> 13;
    h = h.wrapping_mul(0xc2b2_ae35);
    h ^ (h >> 16)
}

/// The 64-bit finaliser of MurmurHash3.
#[inline]
pub fn fmix64(mut k: u64) -> u64 {
    k ^= k >> 33;
    k = k.wrapping_mul(0xff51_afd7_ed55_8ccd);
    k ^= k >> 33;
    k = k.wrapping_mul(0xc4ce_b9fe_1a85_ec53);
    k ^ (k >> 33)
}

/// The reflected CRC-32C polynomial (Castagnoli), 0x1EDC6F41 bit-reversed.
const CRC32C_POLY: u32 = 0x82F6_3B78;

/// Byte-at-a-time lookup table of the reflected CRC-32C.
const CRC32C_TABLE: [u32; 256] = {
    let mut t = [0u32; 256];
    let mut i = 0;
    while i < 256 {
        let mut c = i as u32;
        let mut b = 0;
        while b < 8 {
            c = if c & 1 != 0 {
                (c >> 1) ^ CRC32C_POLY
            } else {
                c >> 1
            };
            b += 1;
        }
        t[i] = c;
        i += 1;
    }
    t
};

/// CRC-32C of `bytes`: reflected, initial value and final XOR 0xFFFFFFFF.
#[inline]
pub fn crc32c(bytes: &[u8]) -> u32 {
    let mut c = !0u32;
    for &b in bytes {
        c = CRC32C_TABLE[((c ^ u32::from(b)) & 0xff) as usize] ^ (c >> 8);
    }
    !c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc32c_check_value() {
        // CRC-32/ISCSI in the published catalogue of parametrised CRC algorithms: check
        // value 0xE3069283 for ASCII "123456789".
        assert_eq!(crc32c(b"123456789"), 0xE306_9283);
        assert_eq!(crc32c(b""), 0);
    }

    #[test]
    fn fibonacci_multipliers() {
        // Knuth, TAOCP vol. 3, §6.4: A = ⌊w/φ⌋; for w = 2^32 this is 2654435769.
        let phi = (1.0 + 5f64.sqrt()) / 2.0;
        assert_eq!(FIB32, (2f64.powi(32) / phi) as u32);
        assert_eq!(FIB32 as u64, FIB64 >> 32);
        // Consecutive keys land far apart in the top bits (the point of the method).
        let a = bucket_of(HashFn::Fibonacci.hash(1, 32), 32, 8, BucketPick::Top);
        let b = bucket_of(HashFn::Fibonacci.hash(2, 32), 32, 8, BucketPick::Top);
        assert_eq!((a, b), (158, 60));
    }

    #[test]
    fn fmix_fixed_points_and_values() {
        // Zero is a fixed point of both finalisers (every step maps 0 to 0; common practice).
        assert_eq!(fmix32(0), 0);
        assert_eq!(fmix64(0), 0);
        // MurmurHash3_x86_32 of the empty input with seed 1 is 0x514E28B7 (value recalled
        // from memory of the reference implementation's test vectors; it is fmix32(1)).
        assert_eq!(fmix32(1), 0x514E_28B7);
    }

    #[test]
    fn bucket_pick() {
        assert_eq!(
            bucket_of(0xABCD_0000_0000_1234, 64, 16, BucketPick::Top),
            0xABCD
        );
        assert_eq!(
            bucket_of(0xABCD_0000_0000_1234, 64, 16, BucketPick::Bottom),
            0x1234
        );
        assert_eq!(bucket_of(u64::MAX, 64, 0, BucketPick::Top), 0);
        assert_eq!(HashFn::parse("crc32c"), Some(HashFn::Crc32c));
    }
}
