//! # plateau
//!
//! Watches a microbial culture grow and says where it is heading: carrying
//! capacity, specific growth rate, lag, growth phase and the time to any target
//! level, updated at every reading in fixed memory with no heap.
//!
//! ## The fixed-memory promise
//!
//! The crate is `#![no_std]`, allocates nothing and has no `unsafe`. Every type
//! has a size known at compile time; the update path never panics and takes
//! bounded time.
//!
//! ## Features
//!
//! * `fast-math`: the `f32` math path uses `micromath` instead of `libm`
//!   (faster, less accurate; see [`math`](crate::Real)). `f64` always uses `libm`.
//! * `defmt`: public types derive `defmt::Format`. The library never logs.
//!
//! ## Example
//!
//! ```
//! use plateau::{GrowthCurve, Logistic};
//! // An invented culture: capacity 1.5 OD, rate 0.7 per hour, midpoint at 8 h.
//! let curve = Logistic::<f32>::from_midpoint(1.5, 0.7, 8.0)?;
//! assert!((curve.value(8.0) - 0.75).abs() < 1e-6);
//! let t90 = curve.time_to_reach(1.35)?;
//! assert!((t90 - (8.0 + libm::logf(9.0) / 0.7)).abs() < 1e-4);
//! # Ok::<(), plateau::Error>(())
//! ```
#![no_std]
#![forbid(unsafe_code)]
#![cfg_attr(docsrs, feature(doc_cfg))]

mod error;
mod estimator;
mod math;
mod monitor;
mod photometer;
pub mod sampler;

pub use error::Error;
pub use estimator::{
    BlankSource, DEFAULT_UNKNOWN_BLANK_SD, Estimate, Estimator, EstimatorConfig, LogisticEstimator,
    Measured, Outcome, Rejection,
};
pub use math::Real;
pub use monitor::{
    Event, Fault, Faults, Monitor, MonitorConfig, Phase, Report, Target, TimedEvent, Watch,
};
pub mod model;
pub use photometer::{
    COMMON_LINEAR_RANGE_OD, Linearity, OpticalDensity, Photometer, PhotometerConfig, Reading,
};
pub use sampler::{MeanCounts, Sampler, SamplerConfig, SamplerError};

pub use model::{
    Baranyi, Blanked, Gompertz, GrowthCurve, Inflection, LagRichards, Logistic, OnlineFamily,
    Population, Richards, ZwieteringLogistic,
};
