//! The command-line layer: arguments reach the library and files appear (or
//! do not, on error).

use std::path::Path;
use std::process::Command;

fn host_sim() -> Command {
    Command::new(env!("CARGO_BIN_EXE_host-sim"))
}

fn scenario(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(name)
}

#[test]
fn simulate_writes_a_reproducible_stream() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a.csv");
    let b = dir.path().join("b.csv");
    for out in [&a, &b] {
        let status = host_sim()
            .arg("simulate")
            .arg(scenario("turbidostat.toml"))
            .arg("--out")
            .arg(out)
            .status()
            .unwrap();
        assert!(status.success());
    }
    let text = std::fs::read_to_string(&a).unwrap();
    assert_eq!(text, std::fs::read_to_string(&b).unwrap());
    assert!(text.starts_with("time_h,od,truth_od,kind\n"));
    // 24 h every 0.05 h: 481 readings plus the header.
    assert_eq!(text.lines().count(), 482);
}

#[test]
fn simulate_with_a_bad_scenario_fails_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.toml");
    std::fs::write(
        &bad,
        "seed = 1\n[model]\nfamily = \"logistic\"\ncapacity_od = 1.0\nrate_per_h = 0.5\n\
         midpoint_h = 5.0\n[sampling]\nduration_h = 10.0\ninterval_h = -0.1\n",
    )
    .unwrap();
    let out = dir.path().join("out.csv");
    let result = host_sim()
        .arg("simulate")
        .arg(&bad)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(!result.status.success());
    let stderr = String::from_utf8_lossy(&result.stderr);
    assert!(stderr.contains("sampling.interval_h"), "{stderr}");
    assert!(!out.exists());
}

#[test]
fn demo_writes_to_the_paths_given() {
    let dir = tempfile::tempdir().unwrap();
    let out_dir = dir.path().join("folder");
    let result = host_sim()
        .arg("demo")
        .arg("--out-dir")
        .arg(&out_dir)
        .output()
        .unwrap();
    assert!(result.status.success());
    let stdout = String::from_utf8_lossy(&result.stdout);
    assert!(stdout.contains("INVENTED"));
    assert!(stdout.contains("batch fit"));
    assert!(out_dir.join("demo.csv").exists());
    assert!(out_dir.join("demo.svg").exists());
}
