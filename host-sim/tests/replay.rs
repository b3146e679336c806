//! `host-sim replay` and `host-sim fleet` from the command line: files appear
//! (or do not, on error), columns and keys are there, invalid readings are
//! kept with their status. Every log here is INVENTED.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;

fn host_sim() -> Command {
    Command::new(env!("CARGO_BIN_EXE_host-sim"))
}

/// An invented logistic culture (capacity 1.2 OD, 0.8 per hour, midpoint
/// 7 h) read every 10 minutes for `hours`, with a fixed small wiggle as
/// noise, as `time_h,od,temp_c` lines (no header).
fn invented_rows(hours: u32) -> Vec<String> {
    (0..=hours * 6)
        .map(|i| {
            let t = f64::from(i) / 6.0;
            let y = 1.2 / (1.0 + (-0.8 * (t - 7.0)).exp());
            let wiggle = 0.002 * (f64::from(i) * 1.7).sin();
            format!(
                "{t:.4},{:.5},37.0",
                y + 0.01 * y * (f64::from(i) * 0.9).cos() + wiggle
            )
        })
        .collect()
}

fn write_log(dir: &Path, name: &str, header: &str, rows: &[String]) -> PathBuf {
    let path = dir.join(name);
    let mut text = format!("{header}\n");
    for r in rows {
        text.push_str(r);
        text.push('\n');
    }
    std::fs::write(&path, text).unwrap();
    path
}

fn replay(log: &Path, out: &Path, summary: &Path, extra: &[&str]) -> Output {
    host_sim()
        .arg("replay")
        .arg(log)
        .arg("--out")
        .arg(out)
        .arg("--summary")
        .arg(summary)
        .args(extra)
        .output()
        .unwrap()
}

fn csv_rows(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_owned)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_owned).collect())
        .collect();
    (header, rows)
}

fn column(header: &[String], name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
}

#[test]
fn a_bad_row_fails_naming_its_line_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let mut rows = invented_rows(4);
    rows[3] = "0.5,abc,37.0".into(); // line 5 (header is line 1)
    let log = write_log(dir.path(), "log.csv", "time_h,od,temp_c", &rows);
    let (out, summary) = (dir.path().join("out.csv"), dir.path().join("s.json"));
    let result = replay(&log, &out, &summary, &[]);
    assert!(!result.status.success());
    let stderr = String::from_utf8_lossy(&result.stderr);
    assert!(stderr.contains("line 5"), "{stderr}");
    assert!(!out.exists() && !summary.exists());

    // With --skip-bad-rows the rest goes through and the line is reported.
    let result = replay(&log, &out, &summary, &["--skip-bad-rows"]);
    assert!(result.status.success());
    let (header, body) = csv_rows(&out);
    assert_eq!(body.len(), rows.len() - 1);
    let line = column(&header, "line");
    assert!(body.iter().all(|r| r[line] != "5"));
    let s: Value = serde_json::from_str(&std::fs::read_to_string(&summary).unwrap()).unwrap();
    assert_eq!(s["skipped_lines"], serde_json::json!([5]));
}

#[test]
fn invalid_readings_are_kept_with_their_status() {
    let dir = tempfile::tempdir().unwrap();
    let mut rows = invented_rows(3);
    rows[4] = "0.6667,NaN,37".into();
    rows[6] = "1.0,-0.02,37".into();
    rows[9] = "0.2,0.05,37".into(); // earlier than the accepted 1.33 h
    let log = write_log(dir.path(), "log.csv", "time_h,od,temp_c", &rows);
    let (out, summary) = (dir.path().join("out.csv"), dir.path().join("s.json"));
    assert!(replay(&log, &out, &summary, &[]).status.success());
    let (header, body) = csv_rows(&out);
    assert_eq!(body.len(), rows.len());
    let status = column(&header, "status");
    assert_eq!(body[4][status], "not_finite");
    assert_eq!(body[6][status], "negative");
    assert_eq!(body[9][status], "time_backwards");
    assert_eq!(body[0][status], "accepted");
    let s: Value = serde_json::from_str(&std::fs::read_to_string(&summary).unwrap()).unwrap();
    assert_eq!(s["readings"], rows.len());
    assert!(s["rejected"].as_u64().unwrap() >= 3);
    assert_eq!(s["rejections"]["negative"], 1);
}

#[test]
fn output_columns_and_summary_keys_with_nulls_while_nothing_is_known() {
    let dir = tempfile::tempdir().unwrap();
    // Two hours of a flat invented culture: no growth, so no estimate.
    let rows: Vec<String> = (0..12)
        .map(|i| format!("{},0.0{},37", f64::from(i) / 6.0, 50 + i % 2))
        .collect();
    let log = write_log(dir.path(), "flat.csv", "time_h,od,temp_c", &rows);
    let (out, summary) = (dir.path().join("out.csv"), dir.path().join("s.json"));
    assert!(replay(&log, &out, &summary, &[]).status.success());
    let (header, body) = csv_rows(&out);
    for name in [
        "time_h",
        "od",
        "status",
        "capacity",
        "capacity_sd",
        "rate_per_h",
        "rate_sd",
        "lag_h",
        "phase",
        "saturation_eta_h",
        "alert",
    ] {
        column(&header, name);
    }
    let cap = column(&header, "capacity");
    assert!(body.iter().all(|r| r[cap].is_empty()));
    // No growth seen: the phase is not yet known (a flat start is not
    // called a lag until a fit shows one).
    assert_eq!(body[0][column(&header, "phase")], "not_yet_known");
    let s: Value = serde_json::from_str(&std::fs::read_to_string(&summary).unwrap()).unwrap();
    for key in [
        "readings",
        "rejected",
        "capacity",
        "capacity_sd",
        "rate_per_h",
        "rate_sd",
        "lag_h",
        "doubling_time_h",
        "inflection_time_h",
        "phase",
        "first_saturation_alert_h",
        "alerts",
        "batch_fit",
    ] {
        assert!(s.get(key).is_some(), "missing {key}");
    }
    for key in [
        "capacity",
        "capacity_sd",
        "rate_per_h",
        "rate_sd",
        "lag_h",
        "doubling_time_h",
        "inflection_time_h",
        "first_saturation_alert_h",
    ] {
        assert!(s[key].is_null(), "{key} = {}", s[key]);
    }
    assert_eq!(s["phase"], "not_yet_known");
    assert_eq!(s["alerts"], serde_json::json!([]));
}

#[test]
fn a_whole_culture_gets_an_estimate_an_alert_and_a_batch_fit() {
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<String> = invented_rows(16)
        .iter()
        .map(|r| {
            // Columns reordered and renamed: the flags pick them by name.
            let f: Vec<&str> = r.split(',').collect();
            format!("{},{},{}", f[2], f[1], f[0])
        })
        .collect();
    let log = write_log(dir.path(), "log.csv", "temp_c,OD600,hours", &rows);
    let (out, summary) = (dir.path().join("out.csv"), dir.path().join("s.json"));
    let result = replay(
        &log,
        &out,
        &summary,
        &["--time-col", "hours", "--value-col", "OD600"],
    );
    assert!(
        result.status.success(),
        "{}",
        String::from_utf8_lossy(&result.stderr)
    );
    let s: Value = serde_json::from_str(&std::fs::read_to_string(&summary).unwrap()).unwrap();
    // The invented truth: capacity 1.2 OD, rate 0.8 per hour; 90 % of the
    // capacity at 7 + ln 9 / 0.8 = 9.75 h (REFERENCES.md, logistic definitions).
    let cap = s["capacity"].as_f64().unwrap();
    assert!((cap - 1.2).abs() < 0.03, "{cap}");
    let rate = s["rate_per_h"].as_f64().unwrap();
    assert!((rate - 0.8).abs() < 0.05, "{rate}");
    let batch = s["batch_fit"]["capacity"].as_f64().unwrap();
    assert!((batch - 1.2).abs() < 0.03, "{batch}");
    let alert = s["first_saturation_alert_h"].as_f64().unwrap();
    assert!(alert > 7.0 && alert < 9.75, "{alert}");
    assert_eq!(s["alerts"][0]["kind"], "saturation_alert");
    assert_eq!(s["phase"], "stationary");
    let (header, body) = csv_rows(&out);
    let alert_col = column(&header, "alert");
    assert_eq!(
        body.iter()
            .filter(|r| r[alert_col] == "saturation_alert")
            .count(),
        1
    );
}

#[test]
fn settings_come_from_a_file_and_flags_and_bad_ones_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let log = write_log(dir.path(), "log.csv", "time_h,od,temp_c", &invented_rows(2));
    let config = dir.path().join("est.toml");
    std::fs::write(&config, "noise_floor_od = 0.004\ngate_sigma = 1.0\n").unwrap();
    let (out, summary) = (dir.path().join("out.csv"), dir.path().join("s.json"));
    let args = ["--config", config.to_str().unwrap()];
    let result = replay(&log, &out, &summary, &args);
    assert!(!result.status.success());
    assert!(String::from_utf8_lossy(&result.stderr).contains("gate_sigma"));
    assert!(!out.exists());
    let result = replay(
        &log,
        &out,
        &summary,
        &["--config", config.to_str().unwrap(), "--gate", "5"],
    );
    assert!(result.status.success());
    assert!(out.exists() && summary.exists());
}

#[test]
fn fleet_prints_finite_figures_and_tracks_the_batch_fit_on_clean_streams() {
    let result = host_sim()
        .args(["fleet", "--runs", "6", "--seed", "3", "--json"])
        .output()
        .unwrap();
    assert!(result.status.success());
    let v: Value = serde_json::from_slice(&result.stdout).unwrap();
    assert_eq!(v["runs"], 6);
    let streams = v["streams"].as_array().unwrap();
    assert_eq!(streams.len(), 5);
    for s in streams {
        for at in ["inflection", "end"] {
            let f = &s[at];
            for key in [
                "capacity_coverage_online",
                "rate_coverage_online",
                "no_capacity",
            ] {
                if let Some(x) = f[key].as_f64() {
                    assert!((0.0..=1.0).contains(&x), "{key} {x}");
                }
            }
            let rate = f["rate_rmse_online"].as_f64().unwrap();
            assert!(rate.is_finite() && rate >= 0.0);
        }
    }
    let clean = &streams[0];
    assert_eq!(clean["stream"], "clean");
    let end = &clean["end"];
    let k = end["capacity_rmse_online"].as_f64().unwrap();
    let k_batch = end["capacity_rmse_batch"].as_f64().unwrap();
    let r = end["rate_rmse_online"].as_f64().unwrap();
    let r_batch = end["rate_rmse_batch"].as_f64().unwrap();
    assert!(k < 2.0 * k_batch, "capacity {k} vs batch {k_batch}");
    // The logistic streams still judge the rate against the logistic's r,
    // while the default online family publishes μmax = r (1 − y₀/K) from its
    // five-parameter curve (told no blank, it widens for one): its rate
    // error is several times the batch logistic's here (measured 9× on these
    // 6 cultures, 4.8× on 200). Judging those streams by μmax is open work.
    assert!(r < 12.0 * r_batch, "rate {r} vs batch {r_batch}");
    // Relative errors of a whole run are small.
    assert!(k < 0.05 && r < 0.1, "{k} {r}");
}
