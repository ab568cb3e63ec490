//! Collisional–radiative populations through the real binary: grids store departure
//! coefficients and flag nothing on ordinary points; a black-body field at the gas temperature
//! gives the LTE grid back; `state --populations cr` reports b_n.

use std::path::Path;
use std::process::Command;

use linegrid::grid::store::GridFile;

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_linegrid")
}

fn spec(dir: &Path, name: &str, physics: &str, extra_params: &str) -> std::path::PathBuf {
    let text = format!(
        r#"[grid]
title = "cr test"
output = "{name}.h5"

[parameters]
temperature = {{ values = [6000.0, 9000.0, 14000.0] }}
hydrogen_density = {{ values = [1.0e12, 1.0e15] }}
hydrogen_column = 1.0e20
background_ratio = 1.2
{extra_params}

[lines]
labels = ["H-alpha", "H-beta", "Ly-alpha", "Ca II K"]

[physics]
{physics}
"#
    );
    let p = dir.join(format!("{name}.toml"));
    std::fs::write(&p, text).unwrap();
    p
}

fn build(spec: &Path) -> GridFile {
    let o = Command::new(bin())
        .args(["build", spec.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    GridFile::open(&spec.with_extension("h5")).unwrap()
}

#[test]
fn cr_grid_stores_departures_and_thermal_field_gives_lte() {
    let tmp = tempfile::tempdir().unwrap();
    let lte = build(&spec(tmp.path(), "lte", "populations = \"lte\"", ""));
    let dark = build(&spec(
        tmp.path(),
        "dark",
        "populations = \"cr\"\ncr_levels = 12",
        "",
    ));
    // Departure coefficients are datasets like any other, one per shell.
    let names = dark.dataset_names();
    for n in 1..=12 {
        assert!(names.contains(&format!("departure_{n}")), "{names:?}");
    }
    assert!(!names.contains(&"departure_13".to_string()));
    assert!(dark.status().unwrap().iter().all(|&s| s == 0));
    let b2 = dark.read("departure_2").unwrap();
    assert!(b2.iter().all(|b| b.is_finite() && *b > 0.0));
    // In the dark, low-density gas the ground shell is overpopulated (b_1 > 1).
    let b1 = dark.read("departure_1").unwrap();
    assert!(b1.iter().any(|&b| b > 2.0), "{b1:?}");
    // A black-body field at each point's own temperature cannot be given as one radiation
    // temperature per point, so use a temperature axis of one value per build.
    for t in [6000.0, 9000.0, 14000.0] {
        let one_t = |name: &str, physics: &str, extra: &str| {
            let name = format!("{name}_{t}");
            let name = name.as_str();
            let text = std::fs::read_to_string(spec(tmp.path(), name, physics, extra))
                .unwrap()
                .replace(
                    "temperature = { values = [6000.0, 9000.0, 14000.0] }",
                    &format!("temperature = {t:.1}"),
                );
            let p = tmp.path().join(format!("{name}.toml"));
            std::fs::write(&p, text).unwrap();
            build(&p)
        };
        let l = one_t("lte1", "populations = \"lte\"", "");
        let c = one_t(
            "bb1",
            "populations = \"cr\"",
            &format!("dilution = 1.0\nradiation_temperature = {t:.1}"),
        );
        let (wl, wc) = (
            l.read("equivalent_width").unwrap(),
            c.read("equivalent_width").unwrap(),
        );
        for (a, b) in wl.iter().zip(wc.iter()) {
            // Same tolerance and reason as tests/nlte_slab.rs (the 1s Lamb shift).
            assert!((b / a - 1.0).abs() < 1e-4, "T={t}: {a:e} vs {b:e}");
        }
        let b = c.read("departure_3").unwrap();
        assert!(b.iter().all(|x| (x - 1.0).abs() < 1e-8), "{b:?}");
    }
    // The radiation field as an axis: photo-ionisation by a 0.1-diluted 8000 K field lowers
    // b_1 (the ground shell is over-populated less) at every point, and the axis is stored.
    let field = build(&spec(
        tmp.path(),
        "field",
        "populations = \"cr\"\ncr_levels = 12",
        "dilution = { values = [0.0, 0.1] }\nradiation_temperature = 8000.0",
    ));
    let axis = field.axes().iter().find(|a| a.name == "dilution").unwrap();
    assert_eq!(axis.values, vec![0.0, 0.1]);
    let b1f = field.read("departure_1").unwrap(); // (temperature, density, dilution)
    for i in 0..3 {
        for j in 0..2 {
            assert_eq!(b1f[[i, j, 0]].to_bits(), b1[[i, j]].to_bits());
            assert!(
                b1f[[i, j, 1]] < b1f[[i, j, 0]],
                "{} vs {}",
                b1f[[i, j, 1]],
                b1f[[i, j, 0]]
            );
        }
    }
    // Lines of other elements keep their LTE strengths bit for bit (the lite coupling: metals
    // stay in LTE at the LTE electron density); hydrogen lines change.
    let (wl, wd) = (
        lte.read("equivalent_width").unwrap(),
        dark.read("equivalent_width").unwrap(),
    );
    let k = wl.shape()[2] - 1; // Ca II K is the last line
    for i in 0..3 {
        for j in 0..2 {
            assert_eq!(wl[[i, j, k]].to_bits(), wd[[i, j, k]].to_bits());
            assert!(wl[[i, j, 0]] != wd[[i, j, 0]]);
        }
    }
}

#[test]
fn state_reports_departure_coefficients() {
    let o = Command::new(bin())
        .args([
            "state",
            "--temperature",
            "10000",
            "--hydrogen-density",
            "1e20",
            "--pure-hydrogen",
            "--populations",
            "cr",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let cr = &v["collisional_radiative"];
    assert_eq!(cr["levels"].as_array().unwrap().len(), 20);
    assert_eq!(cr["escape"], "optically thin lines");
    let b1 = cr["levels"][0]["departure"].as_f64().unwrap();
    // n_e ≈ 1.2e17 at the McWhirter threshold: the ground shell is within a factor ~3 of LTE.
    assert!(b1 > 1.0 && b1 < 4.0, "b1 = {b1}");
    // Options that need the collisional-radiative model are refused without it.
    let o = Command::new(bin())
        .args([
            "state",
            "--temperature",
            "10000",
            "--hydrogen-density",
            "1e20",
            "--dilution",
            "0.5",
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let o = Command::new(bin())
        .args([
            "state",
            "--temperature",
            "10000",
            "--hydrogen-density",
            "1e20",
            "--populations",
            "cr",
            "--dilution",
            "0.5",
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--radiation-temperature"));
}

/// `plot departure` without a table solves the model on a sweep: the exported numbers are
/// the library's own solution at each point, and the picture has the asked size.
#[test]
fn departure_sweep_plot_exports_the_model() {
    use linegrid::atoms::AtomicData;
    use linegrid::eos::{Composition, Density, EosOptions, StateRequest, solve_with};
    use linegrid::formation::departures::{CrSettings, solve_with_escape};
    let tmp = tempfile::tempdir().unwrap();
    let png = tmp.path().join("b.png");
    let csv = tmp.path().join("b.csv");
    let o = Command::new(bin())
        .args([
            "plot",
            "departure",
            "--temperature",
            "12000",
            "--min-electron-density",
            "1e9",
            "--max-electron-density",
            "1e17",
            "--steps",
            "5",
            "--cr-levels",
            "10",
            "--show",
            "2,3,7",
            "-o",
            png.to_str().unwrap(),
            "--data",
            csv.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(&png).unwrap()));
    let reader = decoder.read_info().unwrap();
    assert_eq!((reader.info().width, reader.info().height), (800, 600));
    let text = std::fs::read_to_string(&csv).unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), 5);
    let data = AtomicData::embedded();
    let cr = CrSettings {
        levels: 10,
        ..CrSettings::default()
    };
    for (k, row) in rows.iter().enumerate() {
        let ne = 1e9 * (1e17f64 / 1e9).powf(k as f64 / 4.0);
        let state = solve_with(
            data,
            &StateRequest {
                temperature: 12000.0,
                density: Density::ElectronDensity(ne),
                composition: Composition {
                    elements: Some(vec!["H".into()]),
                    ..Composition::default()
                },
                options: EosOptions::default(),
            },
        )
        .unwrap();
        let sol = solve_with_escape(data, &state, &cr, linegrid::nlte::Escape::Thin).unwrap();
        let b = sol.departures();
        let want = [sol.electron_density, b[1], b[2], b[6]];
        for (got, want) in row.iter().zip(want) {
            assert!((got / want - 1.0).abs() < 1e-12, "row {k}: {got} vs {want}");
        }
    }
}
