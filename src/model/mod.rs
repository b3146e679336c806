//! Growth-curve families, written once over [`Real`](crate::Real) so the same formulas run
//! in `f32` on the device and in `f64` for host references.
//!
//! * [`Logistic`]: the plain logistic y = K / (1 + B e^(−r t)) on the measured
//!   signal, in its three common parameterisations.
//! * [`ZwieteringLogistic`], [`Gompertz`], [`Richards`]: Zwietering's
//!   reparameterised forms on y = ln(N/N0) with asymptote A, maximum specific
//!   growth rate μm and lag λ (Zwietering et al. 1990, Appl. Environ. Microbiol.
//!   56:1875–1881).
//! * [`Baranyi`]: Baranyi & Roberts (1994) with lag, in closed form on
//!   y = ln(x/x0).
//! * [`Population`] maps an ln-scale curve to a population or signal
//!   (N = N0 e^y) and [`Blanked`] adds a blank/baseline offset, so any family can
//!   be compared with raw readings.
//! * [`OnlineFamily`] is the seam to the online estimator: a family's value
//!   and gradient in its parameters, slot averages, and the published
//!   quantities. [`Logistic`] (3 parameters) and [`LagRichards`] (5:
//!   Richards asymmetry on Baranyi's adjusted time) implement it.
//! * [`step`] holds the one-step state transitions the estimator predicts with.
//!
//! Every family implements [`GrowthCurve`]: value, slope, time to reach a level,
//! inflection, maximum slope, tangent lag, doubling time and the early-phase
//! exponential approximation.

mod baranyi;
mod curve;
mod lag_richards;
mod logistic;
mod online;
mod signal;
pub mod step;
mod zwietering;

pub use baranyi::Baranyi;
pub use curve::{GrowthCurve, Inflection};
pub use lag_richards::{LagRichards, PRIOR_C_MEAN, PRIOR_C_SD, PRIOR_LN_SHAPE_SD};
pub use logistic::Logistic;
pub use online::{MAX_PANELS, OnlineFamily};
pub use signal::{Blanked, Population};
pub use zwietering::{Gompertz, Richards, ZwieteringLogistic};

pub(crate) use curve::maximise_slope;
