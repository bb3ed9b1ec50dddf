//! Facts about the host a bench needs to label its figures honestly: hardware threads
//! and the size of the last-level cache.

/// Hardware threads this process may use (1 when unknown).
pub fn threads() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// Size in bytes of the largest (last-level) cache of CPU 0, from
/// `/sys/devices/system/cpu/cpu0/cache/index*/size` (Linux sysfs, values like `32768K`);
/// `None` where it cannot be read.
pub fn llc_bytes() -> Option<u64> {
    let dir = std::fs::read_dir("/sys/devices/system/cpu/cpu0/cache").ok()?;
    dir.filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with("index"))
        .filter_map(|e| std::fs::read_to_string(e.path().join("size")).ok())
        .filter_map(|s| parse_size(&s))
        .max()
}

/// Parses a sysfs cache size: a number with an optional K, M or G suffix (binary units).
fn parse_size(s: &str) -> Option<u64> {
    let t = s.trim();
    let (num, mult) = match t.as_bytes().last()? {
        b'K' => (&t[..t.len() - 1], 1 << 10),
        b'M' => (&t[..t.len() - 1], 1 << 20),
        b'G' => (&t[..t.len() - 1], 1 << 30),
        _ => (t, 1),
    };
    num.parse::<u64>().ok()?.checked_mul(mult)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sysfs_sizes_parse_in_binary_units() {
        // Forms as the Linux sysfs cache ABI documents them (Documentation/ABI, cache "size").
        assert_eq!(parse_size("32768K\n"), Some(32 << 20));
        assert_eq!(parse_size("48K"), Some(48 << 10));
        assert_eq!(parse_size("2M"), Some(2 << 20));
        assert_eq!(parse_size("512"), Some(512));
        assert_eq!(parse_size(""), None);
        assert_eq!(parse_size("big"), None);
    }
}
