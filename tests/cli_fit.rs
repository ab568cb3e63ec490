#![allow(clippy::needless_range_loop)]
//! `audit` and `fit` on small grids built in temp dirs: the audit runs and reports per line
//! and axis; a Balmer line alone is degenerate in temperature and a second family resolves
//! it; fits of noisy direct-solver observations at off-grid parameters recover the truth
//! within 2σ in at least 90 % of 50 trials.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use linegrid::grid::model;
use linegrid::grid::plan::Plan;
use linegrid::grid::spec::Spec;
use linegrid::interp::fit::{FitOptions, fit};
use linegrid::interp::{Grid, Interpolator, Method, Options};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_linegrid"))
        .args(args)
        .output()
        .expect("run linegrid")
}

fn build(dir: &Path, name: &str, spec_text: &str) -> PathBuf {
    let spec = dir.join(format!("{name}.toml"));
    std::fs::write(&spec, spec_text).unwrap();
    let out = dir.join(format!("{name}.h5"));
    let o = run(&[
        "build",
        spec.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    out
}

fn spec(temperature: &str, metallicity: &str, lines: &str) -> String {
    format!(
        "[grid]\ntitle = \"fit test\"\noutput = \"x.h5\"\n\n[parameters]\ntemperature = {temperature}\ngas_pressure = 1.0e4\nmetallicity = {metallicity}\nhydrogen_column = 1.0e22\nbackground_ratio = 1.2\n\n[lines]\nlabels = [{lines}]\n"
    )
}

fn interps(grid: &Grid, labels: &[&str]) -> Vec<Interpolator> {
    let o = Options {
        method: Method::Cubic,
        log_value: true,
        ..Options::default()
    };
    labels
        .iter()
        .map(|l| Interpolator::new(&grid.table("equivalent_width", Some(l)).unwrap(), &o).unwrap())
        .collect()
}

#[test]
fn audit_reports_and_a_balmer_line_alone_is_degenerate_in_temperature() {
    let tmp = tempfile::tempdir().unwrap();
    let g = build(
        tmp.path(),
        "wide",
        &spec(
            "{ log = [6000.0, 20000.0, 14] }",
            "{ values = [-0.5, 0.0] }",
            "\"H-beta\", \"Ca II K\"",
        ),
    );
    let o = run(&["audit", g.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["cells_tested"], 13);
    assert_eq!(v["per_line"].as_array().unwrap().len(), 2);
    assert_eq!(v["per_axis"].as_array().unwrap().len(), 2);
    assert!(v["node_check_max_relative_difference"].as_f64().unwrap() < 1e-12);
    assert!(
        v["per_line"][0]["cubic"]["max"]
            .as_f64()
            .unwrap()
            .is_finite()
    );

    let grid = Grid::open(&g).unwrap();
    let ip = interps(&grid, &["H-beta", "Ca II K"]);
    let truth = [8000.0, 0.0];
    let y: Vec<f64> = ip
        .iter()
        .map(|m| m.evaluate(&truth).unwrap().value)
        .collect();
    let fixed = [None, Some(0.0)];
    // H-beta alone: rises to the Balmer maximum and falls again.
    let one = fit(
        &[&ip[0]],
        &y[..1],
        &[0.02 * y[0]],
        &fixed,
        &FitOptions::default(),
    );
    assert!(one.degenerate, "{one:?}");
    assert!(one.minima.len() >= 2);
    let temps: Vec<f64> = one.minima.iter().map(|m| m.parameters[0]).collect();
    assert!(temps.iter().any(|t| (t - 8000.0).abs() < 50.0), "{temps:?}");
    assert!(temps.iter().any(|t| *t > 10000.0), "{temps:?}");
    // With Ca II K the second solution is rejected.
    let two = fit(
        &[&ip[0], &ip[1]],
        &y,
        &[0.02 * y[0], 0.02 * y[1]],
        &fixed,
        &FitOptions::default(),
    );
    assert!(!two.degenerate, "{two:?}");
    assert!(
        (two.minima[0].parameters[0] - 8000.0).abs() < 50.0,
        "{two:?}"
    );
    assert!(two.minima.len() < 2 || two.minima[1].chi2 - two.minima[0].chi2 > 25.0);

    // The CLI says so too.
    let obs = tmp.path().join("obs.csv");
    std::fs::write(
        &obs,
        format!("line,value,uncertainty\nH-beta,{},{}\n", y[0], 0.02 * y[0]),
    )
    .unwrap();
    let o = run(&[
        "fit",
        g.to_str().unwrap(),
        obs.to_str().unwrap(),
        "--fix",
        "metallicity=0",
        "--json",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["degenerate"], true);
    // Bad input: unknown line, malformed value.
    std::fs::write(&obs, "line,value,uncertainty\nH-zeta,1,0.1\n").unwrap();
    let o = run(&["fit", g.to_str().unwrap(), obs.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("no line 'H-zeta'"));
    std::fs::write(&obs, "line,value,uncertainty\nH-beta,1,x\n").unwrap();
    let o = run(&["fit", g.to_str().unwrap(), obs.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("row 1 (line 2), column 3 (uncertainty)"));
}

/// SplitMix64 (Steele, Lea & Flood 2014) and Box–Muller normals.
struct Rng(u64);
impl Rng {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

#[test]
fn noisy_direct_solver_observations_are_recovered_within_two_sigma() {
    let tmp = tempfile::tempdir().unwrap();
    let labels = ["H-beta", "Ca II K", "Mg II 4481", "Na I D2"];
    let text = spec(
        "{ log = [6000.0, 9000.0, 10] }",
        "{ values = [-0.5, -0.25, 0.0] }",
        "\"H-beta\", \"Ca II K\", \"Mg II 4481\", \"Na I D2\"",
    );
    let g = build(tmp.path(), "fine", &text);
    let grid = Grid::open(&g).unwrap();
    let ip = interps(&grid, &labels);
    let refs: Vec<&Interpolator> = ip.iter().collect();
    let plan = Plan::new(Spec::parse(&text, "fine.toml", tmp.path()).unwrap()).unwrap();
    let quantities = model::quantities(&plan);
    let qi = quantities
        .iter()
        .position(|q| q.name == "equivalent_width")
        .unwrap();
    let mut rng = Rng(2024);
    let trials = 50;
    let mut inside = [0usize; 2];
    for _ in 0..trials {
        let truth = [6300.0 + 2400.0 * rng.uniform(), -0.45 + 0.4 * rng.uniform()];
        let exact = model::evaluate_at(&plan, &quantities, &truth);
        assert_eq!(exact.status, 0);
        let sigma: Vec<f64> = exact.values[qi].iter().map(|v| 0.03 * v).collect();
        let obs: Vec<f64> = exact.values[qi]
            .iter()
            .zip(&sigma)
            .map(|(v, s)| v + s * rng.normal())
            .collect();
        let r = fit(&refs, &obs, &sigma, &[None, None], &FitOptions::default());
        let best = &r.minima[0];
        for d in 0..2 {
            let u = best.uncertainties[d].expect("constrained");
            if (best.parameters[d] - truth[d]).abs() <= 2.0 * u {
                inside[d] += 1;
            }
        }
    }
    eprintln!("within 2 sigma: {inside:?} of {trials} trials (temperature, metallicity)");
    for d in 0..2 {
        assert!(
            inside[d] * 10 >= trials * 9,
            "axis {d}: {} of {trials} within 2 sigma",
            inside[d]
        );
    }
}

#[test]
fn inputs_at_node_values_are_the_plan_points_and_the_audit_sample_is_seeded() {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/specs/good.toml"),
    )
    .unwrap();
    let plan = Plan::new(Spec::parse(&text, "good.toml", Path::new(".")).unwrap()).unwrap();
    for flat in 0..plan.point_count() {
        let idx = plan.unravel(flat);
        let values: Vec<f64> = plan
            .axes
            .iter()
            .zip(&idx)
            .map(|(a, &i)| a.values.values()[i])
            .collect();
        assert_eq!(plan.inputs_at(&values), plan.point(flat));
    }
    // A seeded sample of cells: same seed, same report; all of it when samples >= cells.
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("good.toml"), &text).unwrap();
    let g = build(tmp.path(), "good", &text);
    let g = g.to_str().unwrap();
    let a = run(&["audit", g, "--samples", "1", "--seed", "5", "--json"]);
    let b = run(&["audit", g, "--samples", "1", "--seed", "5", "--json"]);
    assert!(a.status.success(), "{}", String::from_utf8_lossy(&a.stderr));
    assert_eq!(a.stdout, b.stdout);
    let v: serde_json::Value = serde_json::from_slice(&a.stdout).unwrap();
    assert_eq!(v["cells"], 2);
    assert_eq!(v["cells_tested"], 1);
    assert_eq!(v["sampled"], true);
    let o = run(&["audit", g, "--dataset", "nope"]);
    assert_eq!(o.status.code(), Some(2));
}
