//! host-sim: the command-line layer over the `host_sim` library.
//!
//! Commands:
//! * `demo`: the built-in invented culture, fitted and plotted;
//! * `simulate SCENARIO.toml --out stream.csv`: a synthetic sensor stream.

use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::{Parser, Subcommand};
use host_sim::demo::{self, DemoPaths};
use host_sim::scenario::{self, Scenario};

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
