//! Built-in device presets. Each is a TOML text in `presets/` with the arithmetic behind
//! every figure in its comments; a user file names one with `preset = "…"` and overrides
//! any key.

/// Names of the built-in presets.
pub const NAMES: [&str; 2] = ["hbm2x2", "ddr4x2"];

/// The TOML text of preset `name`.
pub fn text(name: &str) -> Option<&'static str> {
    match name {
        "hbm2x2" => Some(include_str!("presets/hbm2x2.toml")),
        "ddr4x2" => Some(include_str!("presets/ddr4x2.toml")),
        _ => None,
    }
}
