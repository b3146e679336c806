//! host-sim: the command-line layer over the `host_sim` library.
//!
//! Commands:
//! * `demo`: the built-in invented culture, fitted and plotted;
//! * `simulate SCENARIO.toml --out stream.csv`: a synthetic sensor stream;
//! * `replay LOG.csv`: a recorded log through the device's estimator;
//! * `fleet`: the Monte Carlo accuracy benchmark.

use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::{Parser, Subcommand, ValueEnum};
use host_sim::demo::{self, DemoPaths};
use host_sim::fleet;
use host_sim::log::{Decimal, LogOptions, TimeUnit};
use host_sim::online::Settings;
use host_sim::replay::{self, ReplayOptions};
use host_sim::scenario::{self, Scenario};
use std::io::{IsTerminal, Write};
use std::process::ExitCode;

/// Host-side simulator for plateau (all built-in data are invented).
#[derive(Parser, Debug)]
#[command(version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
#[allow(clippy::large_enum_variant, reason = "parsed once per run")]
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
        /// The log (delimited text with a header row); `-` reads standard
        /// input.
        log: PathBuf,
        /// Name of the time column. Its unit comes from the name (`time_h`,
        /// `Time (min)`, `t [s]`, `days`) or from --time-unit; ISO 8601
        /// date-times and elapsed [D.]HH:MM:SS need no unit.
        #[arg(long, default_value = "time_h")]
        time_col: String,
        /// Unit of a numeric time column (overrides the header's).
        #[arg(long, value_enum)]
        time_unit: Option<UnitArg>,
        /// Name of a value column (OD units); repeat for several series
        /// (plate wells, channels), replayed in parallel.
        #[arg(long = "value-col")]
        value_cols: Vec<String>,
        /// Every column other than the time, blank and --ignore-col columns
        /// is a value column (a plate: one series per well).
        #[arg(long)]
        all_value_cols: bool,
        /// A column --all-value-cols leaves out; repeatable.
        #[arg(long = "ignore-col")]
        ignore_cols: Vec<String>,
        /// Name of a medium-only (blank) column; repeat for several. Their
        /// mean at each reading is subtracted from every series.
        #[arg(long = "blank-col")]
        blank_cols: Vec<String>,
        /// Field delimiter: `,`, `;`, `tab` or another single character.
        /// Detected when omitted.
        #[arg(long)]
        delimiter: Option<String>,
        /// Decimal separator: detected, or a point or a comma.
        #[arg(long, value_enum, default_value_t = DecimalArg::Auto)]
        decimal: DecimalArg,
        /// A cell text meaning the detector saturated; such a cell is kept
        /// as a reading at the ceiling (needs --ceiling). Repeatable.
        #[arg(long = "saturated-marker")]
        saturated_markers: Vec<String>,
        /// Per-reading CSV output (`-` for standard output).
        #[arg(long)]
        out: Option<PathBuf>,
        /// JSON summary output (`-` for standard output).
        #[arg(long)]
        summary: Option<PathBuf>,
        /// SVG plot of the replay (`-` for standard output).
        #[arg(long)]
        plot: Option<PathBuf>,
        /// Draw the readings on a logarithmic axis.
        #[arg(long)]
        plot_log: bool,
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
        /// Readings before this time (hours on the log's clock) are blank
        /// readings: the medium read before inoculation, averaged into the
        /// blank the estimator subtracts.
        #[arg(long = "blank-until", value_name = "H")]
        blank_until_h: Option<f64>,
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

/// Unit of a numeric time column.
#[derive(Clone, Copy, Debug, ValueEnum)]
enum UnitArg {
    /// Hours.
    H,
    /// Minutes.
    Min,
    /// Seconds.
    S,
    /// Days.
    D,
}

/// Decimal separator.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum DecimalArg {
    /// Detected from the file.
    Auto,
    /// 0.5
    Point,
    /// 0,5
    Comma,
}

fn delimiter(text: &str) -> Result<u8> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() && t != "\"" => Ok(t.as_bytes()[0]),
        t => anyhow::bail!(
            "--delimiter must be one ASCII character other than a quote, or `tab`; got {t:?}"
        ),
    }
}

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        // The reader went away (`| head`): end quietly.
        Err(e) if host_sim::log::is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}

fn run() -> Result<()> {
    let mut stdout = std::io::stdout().lock();
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
            write!(stdout, "{}", demo::describe(&report, &paths))?;
        }
        Command::Replay {
            log,
            time_col,
            time_unit,
            value_cols,
            all_value_cols,
            ignore_cols,
            blank_cols,
            delimiter: delimiter_text,
            decimal,
            saturated_markers,
            out,
            summary,
            plot,
            plot_log,
            skip_bad_rows,
            alert_fraction,
            alert_lead_h,
            config,
            noise_floor,
            noise_fraction,
            blank,
            ceiling,
            gate,
            blank_until_h,
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
                    value_cols: if value_cols.is_empty() && !all_value_cols {
                        vec!["od".to_owned()]
                    } else {
                        value_cols
                    },
                    all_value_cols,
                    ignore_cols,
                    blank_cols,
                    skip_bad_rows,
                    time_unit: time_unit.map(|u| match u {
                        UnitArg::H => TimeUnit::Hours,
                        UnitArg::Min => TimeUnit::Minutes,
                        UnitArg::S => TimeUnit::Seconds,
                        UnitArg::D => TimeUnit::Days,
                    }),
                    delimiter: delimiter_text.as_deref().map(delimiter).transpose()?,
                    decimal: match decimal {
                        DecimalArg::Auto => Decimal::Auto,
                        DecimalArg::Point => Decimal::Point,
                        DecimalArg::Comma => Decimal::Comma,
                    },
                    saturated_markers,
                },
                settings: file.overridden_by(flags),
                alert_fraction,
                alert_lead_h,
                blank_until_h,
            };
            let to_stdout = [&out, &summary, &plot].iter().any(|p| {
                p.as_deref().is_some_and(|p| {
                    ["-", "/dev/stdout", "/dev/fd/1", "/proc/self/fd/1"]
                        .iter()
                        .any(|s| p.as_os_str() == *s)
                })
            });
            let paths = replay::Paths {
                input: log,
                out,
                summary,
                plot,
            };
            let style = replay::PlotStyle {
                log_scale: plot_log,
            };
            let result = replay::run_files(&paths, &options, &style)?;
            for note in &result.notes {
                eprintln!("note: {note}");
            }
            for bad in &result.skipped {
                eprintln!("skipped line {}: {}", bad.line, bad.reason);
            }
            if result.skipped_lines.len() > result.skipped.len() {
                eprintln!(
                    "… and {} more skipped line(s) (all listed in the summary's skipped_lines)",
                    result.skipped_lines.len() - result.skipped.len()
                );
            }
            // The terminal report goes to stderr when an output took stdout.
            if to_stdout {
                eprint!("{}", replay::describe(&result));
            } else {
                write!(stdout, "{}", replay::describe(&result))?;
            }
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
                writeln!(stdout, "{}", serde_json::to_string_pretty(&value)?)?;
            } else {
                write!(stdout, "{}", fleet::render(&report))?;
                write!(stdout, "{}", host_sim::alerts::render(&monitor))?;
                if let Some(shapes) = &shapes {
                    write!(stdout, "{}", fleet::shapes::render(shapes))?;
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
                None => scenario::write_csv(&readings, &mut stdout)?,
            }
        }
    }
    stdout.flush()?;
    Ok(())
}
