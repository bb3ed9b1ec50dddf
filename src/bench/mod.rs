//! Host benchmarks: streaming-bandwidth calibration, timing statistics, and kernel
//! benchmarks reported as a fraction of the calibrated bandwidth.

pub mod calibrate;
pub mod host;
pub mod interleave;
pub mod join;
pub mod scan;
pub mod sgd;
pub mod stats;
