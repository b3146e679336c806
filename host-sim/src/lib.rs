//! host-sim: the host side of plateau.
//!
//! Everything the command-line tool does lives here as plain functions that
//! tests call directly; `main.rs` only parses arguments and prints.
//!
//! * [`scenario`]: synthetic sensor streams described in TOML, generated with a
//!   seeded random source.
//! * [`batch`]: the reference batch least-squares fit of the logistic and its
//!   Cramér–Rao bound.
//! * [`log`]: streaming recorded logs (delimited text as instruments and
//!   spreadsheets write it) and staging output files so that a failed run
//!   leaves none.
//! * [`plot`]: SVG plots of readings, curves, bands, markers and phases.
//! * [`demo`]: the built-in invented culture and its summary.
//! * [`online`]: the device's `f32` estimator fed reading by reading, and its
//!   settings.
//! * [`replay`]: a recorded log through the estimator, one or many series in
//!   parallel; CSV, JSON, a table and a plot out.
//! * [`fleet`]: the Monte Carlo accuracy benchmark.
//!
//! Units throughout: time in hours, signal in OD units, rates per hour.

pub mod alerts;
pub mod batch;
pub mod demo;
pub mod fleet;
pub mod log;
pub mod online;
pub mod plot;
pub mod replay;
pub mod scenario;
