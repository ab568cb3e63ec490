//! The real binary on `sample` (and the library reader on a real file): node values come
//! back exactly, bad input exits 2 with the row/column/axis named.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

use linegrid::interp::{Grid, Interpolator, Method, Options};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_linegrid")
}

fn run(args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .output()
        .expect("run linegrid")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Build tests/specs/good.toml into `dir` and return the grid path.
fn small_grid(dir: &Path) -> PathBuf {
    let spec = dir.join("good.toml");
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/specs/good.toml"),
        &spec,
    )
    .unwrap();
    let out = dir.join("grid.h5");
    let o = run(&[
        "build",
        spec.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    out
}

#[test]
fn sample_reproduces_stored_nodes_and_refuses_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let grid = small_grid(tmp.path());
    let g = grid.to_str().unwrap();

    // Library: every converged node of every line back exactly, both schemes.
    let file = Grid::open(&grid).unwrap();
    let ew = file.read("equivalent_width").unwrap();
    let status = file.status().unwrap();
    let axes = file.axes().to_vec();
    for m in [Method::Linear, Method::Cubic] {
        for (k, line) in file.lines().iter().enumerate() {
            let t = file.table("equivalent_width", Some(&line.label)).unwrap();
            let ip = Interpolator::new(
                &t,
                &Options {
                    method: m,
                    ..Options::default()
                },
            )
            .unwrap();
            for (idx, &st) in status.indexed_iter() {
                let x: Vec<f64> = (0..axes.len()).map(|d| axes[d].values[idx[d]]).collect();
                let mut full: Vec<usize> = (0..axes.len()).map(|d| idx[d]).collect();
                full.push(k);
                let want = ew[full.as_slice()];
                match ip.evaluate(&x) {
                    Ok(s) => {
                        assert_eq!(st, 0);
                        assert!((s.value - want).abs() <= 1e-12 * want.abs(), "{m:?}");
                    }
                    Err(e) => assert!(e.to_string().contains("flagged"), "{e}"),
                }
            }
        }
    }

    // CLI: one point, CSV out.
    let o = run(&[
        "sample",
        g,
        "--at",
        "temperature=9000,gas_pressure=1e4,metallicity=0",
        "--line",
        "H-alpha",
        "--gradient",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.starts_with("temperature,gas_pressure,metallicity,line,equivalent_width,d_equivalent_width_d_temperature"), "{out}");

    // Points from stdin, JSON out.
    let mut child = Command::new(bin())
        .args(["sample", g, "--points", "-", "--json", "--method", "linear"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(b"metallicity,temperature,gas_pressure\n-0.25,7000,3e4\n")
        .unwrap();
    let o = child.wait_with_output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["samples"].as_array().unwrap().len(), 3);

    // Defaults: cubic in log10 of the value; --no-log-value interpolates the value itself
    // (the last of --log-value / --no-log-value wins).
    let at = "temperature=7000,gas_pressure=3e4,metallicity=-0.25";
    for (extra, log_value) in [
        (vec![], true),
        (vec!["--no-log-value"], false),
        (vec!["--no-log-value", "--log-value"], true),
    ] {
        let mut args = vec!["sample", g, "--at", at, "--json"];
        args.extend(extra.iter());
        let o = run(&args);
        assert!(o.status.success(), "{extra:?}: {}", stderr(&o));
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        assert_eq!(v["method"], "cubic", "{extra:?}");
        assert_eq!(v["log_value"], log_value, "{extra:?}");
    }

    // Bad input: exit 2 and the message names the culprit.
    let csv = tmp.path().join("bad.csv");
    std::fs::write(
        &csv,
        "temperature,gas_pressure,metallicity\n7000,3e4,0\n7000,abc,0\n",
    )
    .unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["--at", "temperature=9000,pressure=1e4,metallicity=0"],
            "no axis 'pressure'",
        ),
        (
            vec!["--at", "temperature=9000,gas_pressure=1e4"],
            "axis 'metallicity' missing",
        ),
        (
            vec!["--at", "temperature=90000,gas_pressure=1e4,metallicity=0"],
            "temperature = 90000 is outside",
        ),
        (
            vec![
                "--at",
                "temperature=9000,gas_pressure=1e4,metallicity=0",
                "--line",
                "H-zeta",
            ],
            "no line 'H-zeta'",
        ),
        (
            vec![
                "--at",
                "temperature=9000,gas_pressure=1e4,metallicity=0",
                "--dataset",
                "nope",
            ],
            "no data variable 'nope'",
        ),
        (
            vec!["--points", csv.to_str().unwrap()],
            "row 2 (line 3), column 2 (gas_pressure): 'abc'",
        ),
    ];
    for (extra, needle) in cases {
        let mut args = vec!["sample", g];
        args.extend(extra.iter());
        let o = run(&args);
        assert_eq!(o.status.code(), Some(2), "{extra:?}: {}", stderr(&o));
        assert!(
            stderr(&o).contains(needle),
            "{extra:?}: want '{needle}' in {}",
            stderr(&o)
        );
    }
}

#[test]
fn a_line_with_non_positive_values_is_interpolated_in_the_value_and_said_so() {
    // A background cooler than the gas (ratio 0.8) puts the lines in emission against it:
    // W < 0 there. With the ratio as an axis [0.8, 1.2], every line has negative values.
    let tmp = tempfile::tempdir().unwrap();
    let spec = tmp.path().join("mixed.toml");
    std::fs::write(
        &spec,
        "[grid]\ntitle = \"mixed\"\noutput = \"x.h5\"\n\n[parameters]\ntemperature = { values = [8000.0, 9000.0, 10000.0] }\ngas_pressure = 1.0e4\nhydrogen_column = 1.0e22\nbackground_ratio = { values = [0.8, 1.2] }\n\n[lines]\nlabels = [\"H-alpha\", \"H-beta\"]\n",
    )
    .unwrap();
    let grid = tmp.path().join("mixed.h5");
    let o = run(&[
        "build",
        spec.to_str().unwrap(),
        "--output",
        grid.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let g = grid.to_str().unwrap();
    let at = "temperature=8500,background_ratio=1.1";
    // Default: the value itself for lines with non-positive values, said on stderr and in JSON.
    let o = run(&["sample", g, "--at", at, "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["value_space"], "auto");
    assert_eq!(
        v["linear_value_lines"],
        serde_json::json!(["H-alpha", "H-beta"])
    );
    let o = run(&["sample", g, "--at", at]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("H-alpha, H-beta"), "{}", stderr(&o));
    // Forcing log10 refuses the non-positive values and names the way out.
    let o = run(&["sample", g, "--at", at, "--log-value"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(
        e.contains("not positive, log10 impossible") && e.contains("--no-log-value"),
        "{e}"
    );
    let o = run(&["sample", g, "--at", at, "--no-log-value"]);
    assert!(o.status.success(), "{}", stderr(&o));
}
