//! host-sim: the command-line layer over the `host_sim` library.
//!
//! Commands:
//! * `demo`: the built-in invented culture, fitted and plotted;
//! * `simulate SCENARIO.toml --out stream.csv`: a synthetic sensor stream;
//! * `replay LOG.csv`: a recorded log through the device's estimator;
//! * `fleet`: the Monte Carlo accuracy benchmark.

use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::{Parser, Subcommand};
use host_sim::demo::{self, DemoPaths};
use host_sim::fleet;
use host_sim::log::LogOptions;
use host_sim::online::Settings;
use host_sim::replay::{self, ReplayOptions};
use host_sim::scenario::{self, Scenario};
use std::io::IsTerminal;

/// Host-side simulator for plateau (all built-in data are invented).
#[derive(Parser, Debug)]
#[command(version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run the built-in invented culture: generate its readings, fit them,
    /// print the fit beside the closed-form truth, write a CSV and an SVG.
    Demo {
        /// Folder for demo.csv and demo.svg (created if missing).
        #[arg(long, default_value = "host-sim-out")]
        out_dir: PathBuf,
        /// Write the readings here instead of OUT_DIR/demo.csv.
        #[arg(long)]
        csv: Option<PathBuf>,
        /// Write the plot here instead of OUT_DIR/demo.svg.
        #[arg(long)]
        svg: Option<PathBuf>,
    },
    /// Generate the sensor stream a scenario file describes, as CSV with
    /// columns time_h,od,truth_od,kind.
    Simulate {
        /// The scenario (TOML; see host-sim/scenarios/).
        scenario: PathBuf,
        /// Output CSV (written atomically); standard output if omitted.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Use this seed instead of the scenario's.
        #[arg(long)]
        seed: Option<u64>,
    },
    /// Feed a recorded CSV log through the device's f32 estimator, reading by
    /// reading; write one output row per reading and a JSON summary with the
    /// batch fit of the same log beside it.
    Replay {
        /// The log (CSV with a header row).
        log: PathBuf,
        /// Name of the time column (hours).
        #[arg(long, default_value = "time_h")]
        time_col: String,
        /// Name of the value column (OD units).
        #[arg(long, default_value = "od")]
        value_col: String,
        /// Per-reading CSV output (written atomically).
        #[arg(long)]
        out: Option<PathBuf>,
        /// JSON summary output (written atomically).
        #[arg(long)]
        summary: Option<PathBuf>,
        /// Skip rows that cannot be parsed instead of failing.
        #[arg(long)]
        skip_bad_rows: bool,
        /// Fraction of the capacity that counts as saturation.
        #[arg(long, default_value_t = 0.9)]
        alert_fraction: f64,
        /// How long before saturation to alert, hours.
        #[arg(long, default_value_t = 1.0)]
        alert_lead_h: f64,
        /// Estimator settings file (TOML); flags override it.
        #[arg(long)]
        config: Option<PathBuf>,
        /// Noise floor: sd of a reading at zero signal, OD units.
        #[arg(long)]
        noise_floor: Option<f64>,
        /// Proportional noise: extra sd per unit of signal.
        #[arg(long)]
        noise_fraction: Option<f64>,
        /// Blank (medium-only reading) subtracted before the fit, OD units.
        #[arg(long)]
        blank: Option<f64>,
        /// Sensor ceiling: readings at or above are saturated, OD units.
        #[arg(long)]
        ceiling: Option<f64>,
        /// Innovation gate, standard deviations.
        #[arg(long)]
        gate: Option<f64>,
    },
    /// Monte Carlo accuracy benchmark of the online estimator against the
    /// truth, the batch fit and the Cramér–Rao bound, over seeded invented
    /// cultures.
    Fleet {
        /// Number of cultures.
        #[arg(long, default_value_t = 200)]
        runs: usize,
        /// Seed of the fleet.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Print machine-readable JSON instead of tables.
        #[arg(long)]
        json: bool,
        /// INVENTED cultures per shape family (Richards slow and sharp
        /// shoulder, Gompertz and Baranyi with lag, logistic on an unknown
        /// blank); 0 leaves the shape streams out.
        #[arg(long, default_value_t = 15)]
        shape_runs: usize,
    },
}

fn main() -> Result<()> {
    match Cli::parse().command {
        Command::Demo { out_dir, csv, svg } => {
            let mut paths = DemoPaths::in_dir(&out_dir);
            if let Some(csv) = csv {
                paths.csv = csv;
            }
            if let Some(svg) = svg {
                paths.svg = svg;
            }
            if paths.csv.starts_with(&out_dir) || paths.svg.starts_with(&out_dir) {
                std::fs::create_dir_all(&out_dir)
                    .with_context(|| format!("cannot create {}", out_dir.display()))?;
            }
            let scenario = Scenario::from_toml(demo::DEMO_SCENARIO)?;
            let report = demo::run(&scenario, &paths)?;
            print!("{}", demo::describe(&report, &paths));
        }
        Command::Replay {
            log,
            time_col,
            value_col,
            out,
            summary,
            skip_bad_rows,
            alert_fraction,
            alert_lead_h,
            config,
            noise_floor,
            noise_fraction,
            blank,
            ceiling,
            gate,
        } => {
            let file = match &config {
                Some(path) => Settings::load(path)?,
                None => Settings::default(),
            };
            let flags = Settings {
                noise_floor_od: noise_floor,
                noise_fraction,
                blank_od: blank,
                ceiling_od: ceiling,
                gate_sigma: gate,
            };
            let options = ReplayOptions {
                log: LogOptions {
                    time_col,
                    value_col,
                    skip_bad_rows,
                },
                settings: file.overridden_by(flags),
                alert_fraction,
                alert_lead_h,
            };
            let result = replay::run_files(&log, out.as_deref(), summary.as_deref(), &options)?;
            for line in &result.skipped_lines {
                eprintln!("skipped unparseable line {line}");
            }
            print!("{}", replay::describe(&result));
        }
        Command::Fleet {
            runs,
            seed,
            json,
            shape_runs,
        } => {
            let options = fleet::FleetOptions {
                progress: !json && std::io::stderr().is_terminal(),
                ..fleet::FleetOptions::new(runs, seed)
            };
            let report = fleet::run(&options)?;
            let monitor = host_sim::alerts::run(runs, seed, 1.0);
            let shapes = (shape_runs > 0).then(|| fleet::shapes::run(shape_runs, seed));
            if json {
                let mut value = fleet::to_json(&report);
                if let Some(object) = value.as_object_mut() {
                    object.insert("monitor".into(), serde_json::to_value(&monitor)?);
                    if let Some(shapes) = &shapes {
                        object.insert("shape_streams".into(), fleet::shapes::to_json(shapes));
                    }
                }
                println!("{}", serde_json::to_string_pretty(&value)?);
            } else {
                print!("{}", fleet::render(&report));
                print!("{}", host_sim::alerts::render(&monitor));
                if let Some(shapes) = &shapes {
                    print!("{}", fleet::shapes::render(shapes));
                }
            }
        }
        Command::Simulate {
            scenario: path,
            out,
            seed,
        } => {
            let mut s = Scenario::load(&path)?;
            if let Some(seed) = seed {
                s.seed = seed;
            }
            let readings = scenario::generate(&s)?;
            match out {
                Some(out) => {
                    host_sim::log::write_atomically(&out, |w| scenario::write_csv(&readings, w))?;
                    eprintln!(
                        "{}: {} readings written to {}",
                        s.name,
                        readings.len(),
                        out.display()
                    );
                }
                None => scenario::write_csv(&readings, std::io::stdout().lock())?,
            }
        }
    }
    Ok(())
}
