//! The real binary: `linegrid state`, `constants`, `atoms` — output contract and bad input.

use std::process::{Command, Output};

fn linegrid(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_linegrid"))
        .args(args)
        .output()
        .expect("run linegrid")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn state_json_has_the_documented_fields() {
    let o = linegrid(&[
        "state",
        "--temperature",
        "9500",
        "--electron-pressure",
        "200",
        "--metallicity",
        "0",
        "--json",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for key in [
        "temperature",
        "electron_density",
        "gas_pressure",
        "hydrogen_density",
        "mean_molecular_weight",
        "species",
        "hydrogen_levels",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    assert_eq!(v["status"], "converged");
    let t = v["temperature"].as_f64().unwrap();
    assert!((t - 9500.0).abs() < 1e-9);
    // P_e = n_e k T was the input.
    let pe = v["electron_density"].as_f64().unwrap() * linegrid::constants::K_B * t;
    assert!((pe / 200.0 - 1.0).abs() < 1e-12);
    for name in ["H I", "H II", "H-", "He I", "Ca II", "Fe I", "Fe II"] {
        let s = &v["species"][name];
        for f in ["density", "fraction", "partition_function"] {
            assert!(s[f].as_f64().is_some(), "{name}.{f}");
        }
    }
    let levels = v["hydrogen_levels"].as_array().unwrap();
    assert_eq!(levels.len(), 20);
    assert_eq!(levels[0]["n"], 1);
    assert!(levels[0]["occupation_probability"].as_f64().unwrap() > 0.999);
    assert!(levels[1]["population"].as_f64().unwrap() > 0.0);
}

#[test]
fn pure_hydrogen_and_element_subsets() {
    let o = linegrid(&[
        "state",
        "--temperature",
        "9500",
        "--electron-pressure",
        "200",
        "--pure-hydrogen",
        "--json",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let names: Vec<&String> = v["species"].as_object().unwrap().keys().collect();
    assert_eq!(names.len(), 3, "{names:?}"); // H-, H I, H II
    let o = linegrid(&[
        "state",
        "--temperature",
        "9500",
        "--hydrogen-density",
        "1e15",
        "--elements",
        "H,He,Ca",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(v["species"].get("Ca II").is_some() && v["species"].get("Fe I").is_none());
}

#[test]
fn text_output_lists_species_and_levels() {
    let o = linegrid(&[
        "state",
        "--temperature",
        "6000",
        "--gas-pressure",
        "1e5",
        "--levels",
        "4",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(
        text.contains("electron density")
            && text.contains("Fe II")
            && text.contains("hydrogen shells")
    );
}

/// Every bad input: exit code 2, one message naming the option (and the accepted range).
#[test]
fn bad_input_exits_2_naming_the_option() {
    let base = ["state", "--gas-pressure", "1e4"];
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["--temperature", "0"], "--temperature"),
        (
            vec!["--temperature", "-5000"],
            "invalid --temperature = -5000",
        ),
        (vec!["--temperature", "NaN"], "--temperature"),
        (vec!["--temperature", "inf"], "--temperature"),
        (vec!["--temperature", "1e7"], "between 1000 and 1e6"),
        (vec!["--temperature", "hot"], "--temperature"),
        (
            vec!["--temperature", "6000", "--metallicity", "6"],
            "--metallicity",
        ),
        (
            vec!["--temperature", "6000", "--metallicity", "-5.5"],
            "between -5 and +5",
        ),
        (
            vec!["--temperature", "6000", "--elements", "H,Xx"],
            "unknown element 'Xx'",
        ),
        (
            vec!["--temperature", "6000", "--elements", "Fe"],
            "must contain H",
        ),
        (
            vec!["--temperature", "6000", "--offset", "Zz=0.1"],
            "unknown element 'Zz'",
        ),
        (vec!["--temperature", "6000", "--offset", "Fe"], "--offset"),
        (
            vec!["--temperature", "6000", "--helium-ratio", "-1"],
            "--helium-ratio",
        ),
        (
            vec!["--temperature", "6000", "--electron-density", "1e12"],
            "cannot be used with",
        ),
        (
            vec![
                "--temperature",
                "6000",
                "--pure-hydrogen",
                "--elements",
                "H",
            ],
            "cannot be used with",
        ),
        (vec!["--temperature", "6000", "--levels", "0"], "--levels"),
    ];
    for (extra, needle) in cases {
        let mut args: Vec<&str> = base.to_vec();
        args.extend(extra.iter());
        let o = linegrid(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(needle), "{args:?}: {}", stderr(&o));
    }
    for (opt, v) in [
        ("--gas-pressure", "0"),
        ("--hydrogen-density", "-1e15"),
        ("--gas-pressure", "-3"),
        ("--electron-density", "nan"),
        ("--electron-pressure", "inf"),
    ] {
        let o = linegrid(&["state", "--temperature", "6000", opt, v]);
        assert_eq!(o.status.code(), Some(2), "{opt} {v}");
        assert!(stderr(&o).contains(opt), "{}", stderr(&o));
        assert!(stderr(&o).lines().count() == 1, "one line: {}", stderr(&o));
    }
    // No density at all.
    let o = linegrid(&["state", "--temperature", "6000"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn constants_and_atoms_listings() {
    let o = linegrid(&["constants", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["edition"], "CODATA 2018");
    assert!(v["constants"]["k"]["value"].as_f64().unwrap() > 0.0);
    let o = linegrid(&["atoms", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["elements"].as_array().unwrap().len(), 21);
    let o = linegrid(&["atoms", "--species", "Ca II"]);
    assert!(o.status.success());
    let o = linegrid(&["atoms", "--species", "Qq V"]);
    assert_eq!(o.status.code(), Some(2));
}
