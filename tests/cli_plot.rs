//! `linegrid plot`, the real binary: every kind renders a PNG of the asked size that is not
//! blank, and its `--data` export equals the numbers read independently (the grid through
//! the library reader, `growth --json`, `slab --json`, `audit --json`, the generated table);
//! bad input exits 2 and writes nothing.

use std::collections::HashSet;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

use linegrid::interp::Grid;

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

fn ok(args: &[&str]) -> Output {
    let o = run(args);
    assert!(o.status.success(), "{args:?}: {}", stderr(&o));
    o
}

/// The demo grid (grids/demo.toml), built once per test run.
fn demo_grid() -> &'static Path {
    static GRID: OnceLock<PathBuf> = OnceLock::new();
    GRID.get_or_init(|| {
        let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("cli_plot");
        std::fs::create_dir_all(&dir).unwrap();
        let out = dir.join("demo.h5");
        let _ = std::fs::remove_file(&out);
        let _ = std::fs::remove_file(dir.join("demo.h5.partial"));
        let spec = Path::new(env!("CARGO_MANIFEST_DIR")).join("grids/demo.toml");
        ok(&[
            "build",
            spec.to_str().unwrap(),
            "--output",
            out.to_str().unwrap(),
            "--quiet",
        ]);
        out
    })
}

/// Decode a PNG: (width, height, RGB pixels).
fn decode(path: &Path) -> (u32, u32, Vec<[u8; 3]>) {
    let file = std::io::BufReader::new(std::fs::File::open(path).unwrap());
    let mut reader = png::Decoder::new(file).read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    assert_eq!(info.color_type, png::ColorType::Rgb);
    assert_eq!(info.bit_depth, png::BitDepth::Eight);
    let px = buf[..info.buffer_size()]
        .chunks_exact(3)
        .map(|c| [c[0], c[1], c[2]])
        .collect();
    (info.width, info.height, px)
}

/// The picture has the asked size and is not blank: many distinct colours (curves, text
/// antialiasing) and a real share of non-white pixels. Thresholds: common practice, no source.
fn check_picture(path: &Path, w: u32, h: u32) {
    let (pw, ph, px) = decode(path);
    assert_eq!((pw, ph), (w, h), "{}", path.display());
    let distinct: HashSet<[u8; 3]> = px.iter().copied().collect();
    let inked = px.iter().filter(|p| **p != [255, 255, 255]).count() as f64 / px.len() as f64;
    assert!(
        distinct.len() >= 40,
        "{}: {} colours",
        path.display(),
        distinct.len()
    );
    assert!(inked > 0.02, "{}: {:.4} inked", path.display(), inked);
}

fn csv_rows(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let head: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    (head, rows)
}

fn num(s: &str) -> f64 {
    if s.is_empty() {
        f64::NAN
    } else {
        s.parse().unwrap()
    }
}

/// Equal to 1e-12 relative, or both NaN.
fn close(a: f64, b: f64) -> bool {
    (a.is_nan() && b.is_nan()) || (a - b).abs() <= 1e-12 * b.abs()
}

fn node(axis: &[f64], v: f64) -> usize {
    axis.iter()
        .position(|x| (x - v).abs() <= 1e-12 * x.abs())
        .unwrap_or_else(|| panic!("{v} is not a node"))
}

#[test]
fn strength_plot_exports_the_grid_values() {
    let grid = demo_grid();
    let tmp = tempfile::tempdir().unwrap();
    let png = tmp.path().join("s.png");
    let csv = tmp.path().join("s.csv");
    let lines = ["H-alpha", "Ca II K", "He I 4471"];
    ok(&[
        "plot",
        "strength",
        grid.to_str().unwrap(),
        "--lines",
        &lines.join(","),
        "--by",
        "metallicity",
        "--fix",
        "gas_pressure=1e4",
        "--log-y",
        "-o",
        png.to_str().unwrap(),
        "--data",
        csv.to_str().unwrap(),
    ]);
    check_picture(&png, 800, 600);
    // Independently: the library reader on the same file.
    let g = Grid::open(grid).unwrap();
    let ew = g.read("equivalent_width").unwrap();
    let status = g.status().unwrap();
    let axes = g.axes().to_vec();
    let (head, rows) = csv_rows(&csv);
    assert_eq!(
        head,
        [
            "line",
            "metallicity",
            "temperature",
            "gas_pressure",
            "equivalent_width",
            "status"
        ]
    );
    let nt = axes[0].values.len();
    assert_eq!(rows.len(), lines.len() * 3 * nt);
    let mut seen = HashSet::new();
    for r in &rows {
        let k = g.line_index(&r[0]).unwrap();
        let it = node(&axes[0].values, num(&r[2]));
        let ip = node(&axes[1].values, num(&r[3]));
        let im = node(&axes[2].values, num(&r[1]));
        assert_eq!(ip, node(&axes[1].values, 1e4));
        let want = ew[[it, ip, im, k]];
        assert!(close(num(&r[4]), want), "{r:?}: grid {want}");
        assert_eq!(r[5].parse::<u8>().unwrap(), status[[it, ip, im]]);
        seen.insert((k, it, im));
    }
    assert_eq!(seen.len(), rows.len(), "every point once");

    // Other sizes, SVG, and the default node (middle pressure) without --fix.
    let small = tmp.path().join("small.png");
    ok(&[
        "plot",
        "strength",
        grid.to_str().unwrap(),
        "--lines",
        "H-beta",
        "--width",
        "640",
        "--height",
        "480",
        "-o",
        small.to_str().unwrap(),
        "--data",
        csv.to_str().unwrap(),
    ]);
    check_picture(&small, 640, 480);
    let (head, rows) = csv_rows(&csv);
    assert_eq!(
        head,
        [
            "line",
            "temperature",
            "gas_pressure",
            "metallicity",
            "equivalent_width",
            "status"
        ]
    );
    for r in &rows {
        assert_eq!(num(&r[2]), axes[1].values[axes[1].values.len() / 2]);
        assert_eq!(num(&r[3]), axes[2].values[axes[2].values.len() / 2]);
    }
    let svg = tmp.path().join("s.svg");
    ok(&[
        "plot",
        "strength",
        grid.to_str().unwrap(),
        "--lines",
        "H-beta,Na I D2",
        "--by",
        "gas_pressure",
        "--width",
        "1000",
        "--height",
        "700",
        "-o",
        svg.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg") && text.contains("width=\"1000\""));
    assert!(
        text.contains("Na I D2")
            && text.matches("<path").count() + text.matches("<polyline").count() > 10
    );
}

#[test]
fn growth_plot_exports_the_curve_of_growth() {
    let tmp = tempfile::tempdir().unwrap();
    let png = tmp.path().join("g.png");
    let csv = tmp.path().join("g.csv");
    let gas = [
        "--line",
        "Ca II K",
        "--temperature",
        "9500",
        "--gas-pressure",
        "1e4",
    ];
    let mut args = vec!["plot", "growth"];
    args.extend(gas);
    args.extend(["-o", png.to_str().unwrap(), "--data", csv.to_str().unwrap()]);
    ok(&args);
    check_picture(&png, 800, 600);
    let mut args = vec!["growth", "--json"];
    args.extend(gas);
    let o = ok(&args);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let pts = v["points"].as_array().unwrap();
    let (head, rows) = csv_rows(&csv);
    assert_eq!(head[0], "column_cm-2");
    assert_eq!(rows.len(), pts.len());
    for (r, p) in rows.iter().zip(pts) {
        let f = |k: &str| p[k].as_f64().unwrap_or(f64::NAN);
        assert!(close(num(&r[0]), f("column")));
        assert!(close(num(&r[1]).log10(), f("log_nf_lambda")));
        assert!(close(num(&r[2]), f("tau0")));
        assert!(close(num(&r[3]), f("equivalent_width")));
        assert!(close(num(&r[4]), f("linear")));
        assert!(close(num(&r[5]), f("flat")));
        assert!(close(num(&r[6]), f("damping")));
        assert!(close(num(&r[7]), f("stark")));
    }
    assert_eq!(v["profile"], "voigt");
    // A hydrogen line goes through its Stark profile and gets the quasi-static asymptote.
    let hb = [
        "--line",
        "H-beta",
        "--temperature",
        "9500",
        "--gas-pressure",
        "1e4",
    ];
    let mut args = vec!["plot", "growth"];
    args.extend(hb);
    args.extend(["-o", png.to_str().unwrap(), "--data", csv.to_str().unwrap()]);
    ok(&args);
    let mut args = vec!["growth", "--json"];
    args.extend(hb);
    let v: serde_json::Value = serde_json::from_slice(&ok(&args).stdout).unwrap();
    assert_eq!(v["profile"], "stark");
    let pts = v["points"].as_array().unwrap();
    let (head, rows) = csv_rows(&csv);
    assert_eq!(head[7], "w_stark_angstrom");
    for (r, p) in rows.iter().zip(pts) {
        let stark = p["stark"].as_f64().unwrap();
        assert!(stark > 0.0 && close(num(&r[7]), stark));
    }
}

#[test]
fn profile_plot_matches_the_slab() {
    let tmp = tempfile::tempdir().unwrap();
    let png = tmp.path().join("p.png");
    let csv = tmp.path().join("p.csv");
    let slab = [
        "--temperature",
        "9500",
        "--gas-pressure",
        "1e4",
        "--hydrogen-column",
        "1e22",
        "--background-temperature",
        "11400",
    ];
    let mut args = vec!["plot", "profile", "--line", "Mg II 4481"];
    args.extend(slab);
    args.extend([
        "--span",
        "40",
        "--samples",
        "8001",
        "-o",
        png.to_str().unwrap(),
        "--data",
        csv.to_str().unwrap(),
    ]);
    ok(&args);
    check_picture(&png, 800, 600);
    let mut args = vec!["slab", "--json", "--lines", "Mg II 4481"];
    args.extend(slab);
    let v: serde_json::Value = serde_json::from_slice(&ok(&args).stdout).unwrap();
    let line = &v["lines"][0];
    let (head, rows) = csv_rows(&csv);
    assert_eq!(
        head,
        ["offset_angstrom", "wavelength_angstrom", "normalised"]
    );
    let d: Vec<(f64, f64)> = rows.iter().map(|r| (num(&r[0]), num(&r[2]))).collect();
    assert_eq!(d.len(), 8001);
    // The centre sample is the slab's central depth (same formula, flux view).
    let centre = d[4000];
    assert_eq!(centre.0, 0.0);
    let depth = line["central_depth"].as_f64().unwrap();
    assert!(
        ((1.0 - centre.1) - depth).abs() <= 1e-12 * depth,
        "{} vs {depth}",
        1.0 - centre.1
    );
    // The trapezoid area of 1 − F/F_c over ±40 Å against the slab's adaptive W_λ: the
    // window misses the Lorentz wings beyond 40 Å, so agreement to 1 % (consistency check,
    // common practice, no source).
    let area: f64 = d
        .windows(2)
        .map(|w| 0.5 * ((1.0 - w[0].1) + (1.0 - w[1].1)) * (w[1].0 - w[0].0))
        .sum();
    let w = line["equivalent_width"].as_f64().unwrap();
    assert!((area / w - 1.0).abs() < 0.01, "area {area} Å, W {w} Å");
    // Continuum far out: F/F_c → 1 from below.
    assert!(d[0].1 < 1.0 && d[0].1 > 0.99, "{:?}", d[0]);
}

#[test]
fn audit_map_matches_the_audit() {
    let grid = demo_grid();
    let g = grid.to_str().unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let png = tmp.path().join("a.png");
    let csv = tmp.path().join("a.csv");
    ok(&[
        "plot",
        "audit",
        g,
        "--samples",
        "40",
        "--seed",
        "3",
        "--x",
        "temperature",
        "--y",
        "gas_pressure",
        "-o",
        png.to_str().unwrap(),
        "--data",
        csv.to_str().unwrap(),
    ]);
    check_picture(&png, 800, 600);
    let o = ok(&["audit", g, "--samples", "40", "--seed", "3", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let worst_audit = v["per_line"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|l| l["linear"]["max"].as_f64())
        .fold(0.0, f64::max);
    let (head, rows) = csv_rows(&csv);
    assert_eq!(head[0], "temperature_lo");
    let axes = Grid::open(grid).unwrap().axes().to_vec();
    let (nt, np) = (axes[0].values.len() - 1, axes[1].values.len() - 1);
    assert_eq!(rows.len(), nt * np);
    let mut tested = 0;
    let mut worst_map = 0.0f64;
    for (i, r) in rows.iter().enumerate() {
        let (ix, iy) = (i % nt, i / nt);
        assert_eq!(num(&r[0]).to_bits(), axes[0].values[ix].to_bits());
        assert_eq!(num(&r[1]).to_bits(), axes[0].values[ix + 1].to_bits());
        assert_eq!(num(&r[2]).to_bits(), axes[1].values[iy].to_bits());
        assert_eq!(num(&r[3]).to_bits(), axes[1].values[iy + 1].to_bits());
        let n: usize = r[6].parse().unwrap();
        tested += n;
        let e = num(&r[4]);
        assert_eq!(n == 0, e.is_nan(), "{r:?}");
        if e.is_finite() {
            worst_map = worst_map.max(e);
        }
    }
    assert_eq!(tested, v["cells_tested"].as_u64().unwrap() as usize);
    assert!(
        close(worst_map, worst_audit),
        "{worst_map} vs {worst_audit}"
    );
}

/// A smooth made-up table: b_n rising from 1 − 0.5/n at low density to 1 at high density
/// (no physics; only a table to draw).
fn departure_table(levels: &[u32], ne: &[f64]) -> Vec<Vec<f64>> {
    ne.iter()
        .map(|x| {
            levels
                .iter()
                .map(|&n| {
                    let crit = 10f64.powf(16.0 - f64::from(n));
                    1.0 - 0.5 / f64::from(n) / (1.0 + x / crit)
                        + if n == 1 { 3.0 / (1.0 + x / 1e12) } else { 0.0 }
                })
                .collect()
        })
        .collect()
}

#[test]
fn departure_plot_renders_a_generated_table() {
    let tmp = tempfile::tempdir().unwrap();
    let levels = [1u32, 2, 3, 4, 5, 6, 7, 8];
    let ne: Vec<f64> = (0..=24)
        .map(|i| 10f64.powf(8.0 + 0.375 * f64::from(i)))
        .collect();
    let b = departure_table(&levels, &ne);
    let mut csv_in = String::from("# generated in the test\nn_e");
    for n in &levels {
        csv_in.push_str(&format!(",b_{n}"));
    }
    csv_in.push('\n');
    for (x, row) in ne.iter().zip(&b) {
        csv_in.push_str(&format!("{x:e}"));
        for v in row {
            csv_in.push_str(&format!(",{v:e}"));
        }
        csv_in.push('\n');
    }
    let table = tmp.path().join("b.csv");
    std::fs::write(&table, &csv_in).unwrap();
    let json = serde_json::json!({"n_e": ne, "levels": levels, "b": b});
    let table_json = tmp.path().join("b.json");
    std::fs::write(&table_json, json.to_string()).unwrap();
    for (input, name) in [(&table, "c"), (&table_json, "j")] {
        let png = tmp.path().join(format!("{name}.png"));
        let out = tmp.path().join(format!("{name}.out.csv"));
        ok(&[
            "plot",
            "departure",
            input.to_str().unwrap(),
            "-o",
            png.to_str().unwrap(),
            "--data",
            out.to_str().unwrap(),
        ]);
        check_picture(&png, 800, 600);
        let (head, rows) = csv_rows(&out);
        assert_eq!(head.len(), levels.len() + 1);
        assert_eq!(head[0], "n_e");
        assert_eq!(rows.len(), ne.len());
        for (r, (x, want)) in rows.iter().zip(ne.iter().zip(&b)) {
            assert!(close(num(&r[0]), *x));
            for (k, v) in want.iter().enumerate() {
                assert!(close(num(&r[k + 1]), *v), "{r:?}");
            }
        }
    }
}

#[test]
fn bad_input_exits_2_and_writes_nothing() {
    let grid = demo_grid();
    let g = grid.to_str().unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("out");
    std::fs::create_dir(&dir).unwrap();
    let png = dir.join("x.png");
    let csv = dir.join("x.csv");
    let (p, c) = (png.to_str().unwrap(), csv.to_str().unwrap());
    let not_grid = tmp.path().join("not.h5");
    std::fs::write(&not_grid, "plain text").unwrap();
    let bad_table = tmp.path().join("bad.csv");
    std::fs::write(&bad_table, "n_e,b_1,b_2\n1e10,1,1\n1e11,1,oops\n").unwrap();
    let bad_json = tmp.path().join("bad.json");
    std::fs::write(&bad_json, "{\"n_e\": [1e10], \"b\": [[1]]}").unwrap();
    // `plot KIND [ARGS…] EXTRA… -o x.png --data x.csv`
    let cmd = |head: &[&str], extra: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = ["plot"].iter().chain(head).map(|s| s.to_string()).collect();
        v.extend(extra.iter().map(|s| s.to_string()));
        v.extend(["-o".into(), p.into(), "--data".into(), c.into()]);
        v
    };
    let strength = |extra: &[&str]| cmd(&["strength", g], extra);
    let slab = [
        "--line",
        "H-alpha",
        "--temperature",
        "9500",
        "--gas-pressure",
        "1e4",
        "--thickness",
        "1e7",
    ];
    let profile = |extra: &[&str]| {
        let mut e: Vec<&str> = slab.to_vec();
        e.extend(extra);
        cmd(&["profile"], &e)
    };
    let only_output = |path: PathBuf| -> Vec<String> {
        let mut v: Vec<String> = ["plot", "strength", g, "--lines", "H-alpha", "-o"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        v.push(path.to_str().unwrap().into());
        v
    };
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            strength(&["--lines", "H-alpha,H-omega"]),
            "no line 'H-omega'",
        ),
        (
            strength(&["--lines", "H-alpha", "--by", "density"]),
            "--by density",
        ),
        (
            strength(&["--lines", "H-alpha", "--x", "pressure"]),
            "--x pressure",
        ),
        (
            strength(&["--lines", "H-alpha", "--fix", "gas_pressure=1e7"]),
            "outside the grid's range",
        ),
        (
            strength(&["--lines", "H-alpha", "--fix", "gas_pressure=2e4"]),
            "not a node",
        ),
        (
            strength(&["--lines", "H-alpha", "--fix", "metallicity=low"]),
            "not a number",
        ),
        (
            strength(&[
                "--lines",
                "H-alpha",
                "--by",
                "metallicity",
                "--fix",
                "metallicity=0",
            ]),
            "cannot be fixed",
        ),
        (
            strength(&["--lines", "H-alpha", "--dataset", "electron_density"]),
            "not a per-line",
        ),
        (
            strength(&["--lines", "H-alpha", "--width", "50"]),
            "picture size",
        ),
        (
            cmd(
                &["strength", not_grid.to_str().unwrap()],
                &["--lines", "H-alpha"],
            ),
            "not.h5",
        ),
        (only_output(dir.join("x.jpg")), ".png or .svg"),
        (only_output(dir.join("missing/x.png")), "does not exist"),
        (
            cmd(
                &["growth"],
                &[
                    "--line",
                    "Ca II Q",
                    "--temperature",
                    "9500",
                    "--gas-pressure",
                    "1e4",
                ],
            ),
            "Ca II Q",
        ),
        (
            profile(&["--background-temperature", "11400", "--span", "-3"]),
            "--span",
        ),
        (
            profile(&["--no-background", "--no-continuum"]),
            "needs a continuum",
        ),
        (
            cmd(&["audit", g], &["--x", "temperature", "--y", "temperature"]),
            "both name",
        ),
        (cmd(&["audit", g], &["--line", "Fe I 9999"]), "Fe I 9999"),
        (
            cmd(&["departure", bad_table.to_str().unwrap()], &[]),
            "line 3, column 'b_2'",
        ),
        (
            cmd(&["departure", bad_json.to_str().unwrap()], &[]),
            "levels",
        ),
    ];
    for (args, want) in &cases {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = run(&a);
        assert_eq!(o.status.code(), Some(2), "{a:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(want), "{a:?}: {}", stderr(&o));
        let left: Vec<_> = std::fs::read_dir(&dir).unwrap().collect();
        assert!(left.is_empty(), "{a:?} left {left:?}");
    }
}
