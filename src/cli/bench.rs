//! `weir calibrate` and `weir bench`.

use weir::Result;

use super::args::{BenchArgs, CalibrateArgs};
use super::Outcome;

/// `weir calibrate`.
pub fn calibrate(_a: CalibrateArgs) -> Result<Outcome> {
    Err(weir::Error::input("calibrate: not built yet"))
}

/// `weir bench`.
pub fn bench(_a: BenchArgs) -> Result<Outcome> {
    Err(weir::Error::input("bench: not built yet"))
}
