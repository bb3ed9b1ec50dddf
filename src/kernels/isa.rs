//! The instruction set a kernel's inner loops run with, as a token only run-time
//! detection can make.
//!
//! Invariant: an [`Isa`] other than [`Isa::portable`] exists only if this CPU was seen to
//! support every feature listed for it in [`Isa::features`]. A `#[target_feature]`
//! function may therefore be called when it enables no feature outside that list; the
//! fields are private, so safe code cannot forge a wider token.
//!
//! ```text
//!   detect() ──► avx512 (F BW VL + BMI1 BMI2 POPCNT)  ⊃  avx2 (AVX2 + BMI1 BMI2 POPCNT)  ⊃  portable
//! ```

/// The levels, widest first. Private so only [`Isa`]'s constructors choose one.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Level {
    /// x86-64 with AVX-512 F/BW/VL, BMI1, BMI2 and POPCNT.
    #[cfg(target_arch = "x86_64")]
    Avx512,
    /// x86-64 with AVX2, BMI1, BMI2 and POPCNT.
    #[cfg(target_arch = "x86_64")]
    Avx2,
    /// Whatever the build targets.
    Portable,
}

/// A detected instruction set (see the module invariant).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Isa(Level);

impl Isa {
    /// The widest instruction set this CPU supports.
    pub fn detect() -> Isa {
        Isa::available()[0]
    }

    /// Every instruction set this CPU supports, widest first; never empty (the last is
    /// portable). Tests run each kernel path with each of these.
    pub fn available() -> Vec<Isa> {
        let mut v = Vec::with_capacity(3);
        #[cfg(target_arch = "x86_64")]
        {
            let base = std::is_x86_feature_detected!("bmi1")
                && std::is_x86_feature_detected!("bmi2")
                && std::is_x86_feature_detected!("popcnt");
            if base
                && std::is_x86_feature_detected!("avx512f")
                && std::is_x86_feature_detected!("avx512bw")
                && std::is_x86_feature_detected!("avx512vl")
            {
                v.push(Isa(Level::Avx512));
            }
            if base && std::is_x86_feature_detected!("avx2") {
                v.push(Isa(Level::Avx2));
            }
        }
        v.push(Isa::portable());
        v
    }

    /// The baseline of the build target, always available.
    pub fn portable() -> Isa {
        Isa(Level::Portable)
    }

    /// The level, for dispatch inside the crate.
    pub(crate) fn level(self) -> Level {
        self.0
    }

    /// The target features this level guarantees (as `#[target_feature]` spells them).
    pub fn features(self) -> &'static str {
        match self.0 {
            #[cfg(target_arch = "x86_64")]
            Level::Avx512 => "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt",
            #[cfg(target_arch = "x86_64")]
            Level::Avx2 => "avx2,bmi1,bmi2,popcnt",
            Level::Portable => "",
        }
    }

    /// Name for reports: "avx512", "avx2" or "portable".
    pub fn name(self) -> &'static str {
        match self.0 {
            #[cfg(target_arch = "x86_64")]
            Level::Avx512 => "avx512",
            #[cfg(target_arch = "x86_64")]
            Level::Avx2 => "avx2",
            Level::Portable => "portable",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn available_is_widest_first_and_ends_portable() {
        let v = Isa::available();
        assert_eq!(v[0], Isa::detect());
        assert_eq!(*v.last().unwrap(), Isa::portable());
        let names: Vec<&str> = v.iter().map(|i| i.name()).collect();
        let order = ["avx512", "avx2", "portable"];
        let pos: Vec<usize> = names
            .iter()
            .map(|n| order.iter().position(|o| o == n).unwrap())
            .collect();
        assert!(pos.windows(2).all(|w| w[0] < w[1]), "{names:?}");
    }

    #[cfg(target_arch = "x86_64")]
    #[test]
    fn every_listed_feature_of_each_level_is_detected() {
        // The features are checked here one by one against the standard library's own
        // detection, so a level can never promise a feature the CPU lacks.
        for isa in Isa::available() {
            for f in isa.features().split(',').filter(|f| !f.is_empty()) {
                let ok = match f {
                    "avx512f" => std::is_x86_feature_detected!("avx512f"),
                    "avx512bw" => std::is_x86_feature_detected!("avx512bw"),
                    "avx512vl" => std::is_x86_feature_detected!("avx512vl"),
                    "avx2" => std::is_x86_feature_detected!("avx2"),
                    "bmi1" => std::is_x86_feature_detected!("bmi1"),
                    "bmi2" => std::is_x86_feature_detected!("bmi2"),
                    "popcnt" => std::is_x86_feature_detected!("popcnt"),
                    other => panic!("feature {other} has no check"),
                };
                assert!(ok, "{} lists {f}, which this CPU lacks", isa.name());
            }
        }
    }
}
