//! `linegrid sample`: interpolate a grid at given points (value and gradient).

use std::io::Read;
use std::path::{Path, PathBuf};

use clap::{Args, ValueEnum};
use serde_json::json;

use linegrid::grid::store::StoreError;
use linegrid::interp::{Coord, Grid, InterpError, Interpolator, Method, Options};

use super::{Failure, emit, print_json};

/// Map an interpolation error to its exit code: the user's names and points are bad input
/// (2); a damaged file or a flagged region of the grid is a failure (1). A stencil refused
/// only for a value that has no log10 says how to interpolate the value itself.
pub fn interp_failure(e: InterpError) -> Failure {
    match &e {
        InterpError::Flagged {
            non_positive: true, ..
        } => Failure::failed(anyhow::anyhow!(
            "{e}; values are interpolated in log10 by default, --no-log-value interpolates the value itself"
        )),
        InterpError::Store(StoreError::UnknownDataset { .. })
        | InterpError::Store(StoreError::WrongKind { .. })
        | InterpError::Store(StoreError::NotHdf5 { .. })
        | InterpError::Store(StoreError::Io { .. })
        | InterpError::Store(StoreError::NotAGridFile { .. })
        | InterpError::UnknownAxis { .. }
        | InterpError::UnknownLine { .. }
        | InterpError::DatasetUse { .. }
        | InterpError::BadCoordinate { .. }
        | InterpError::BadPoint { .. }
        | InterpError::OutOfRange { .. } => Failure::bad_input(e),
        _ => Failure::failed(e),
    }
}

/// Interpolation scheme, as an option.
#[derive(Clone, Copy, ValueEnum)]
pub enum MethodArg {
    /// Multilinear
    Linear,
    /// Cubic Hermite with Catmull-Rom slopes (C1)
    Cubic,
}

impl From<MethodArg> for Method {
    fn from(m: MethodArg) -> Method {
        match m {
            MethodArg::Linear => Method::Linear,
            MethodArg::Cubic => Method::Cubic,
        }
    }
}

/// Options shared by `sample`, `fit`: how to interpolate.
#[derive(Args, Clone)]
pub struct InterpArgs {
    /// Interpolation scheme (default cubic: the smallest error in `linegrid audit`)
    #[arg(long, value_enum, default_value = "cubic")]
    pub method: MethodArg,
    /// Interpolate log10 of the value for every line (values must be positive at the
    /// stencil's nodes; a point whose stencil touches a zero or negative value is refused).
    /// Default: log10 for each line whose converged values are all positive, the value itself
    /// for the others (e.g. a line that vanishes in part of the grid); the output says which
    #[arg(long, overrides_with = "no_log_value")]
    pub log_value: bool,
    /// Interpolate the value itself instead of its log10
    #[arg(long, overrides_with = "log_value")]
    pub no_log_value: bool,
    /// Clamp points outside the grid to its edge instead of failing
    #[arg(long)]
    pub clamp: bool,
    /// Coordinate of an axis: AXIS=linear|log10|theta (repeatable; default theta for
    /// temperature, log10 for axes spanning more than a decade, else linear)
    #[arg(long = "coord", value_name = "AXIS=COORD")]
    pub coords: Vec<String>,
}

impl InterpArgs {
    /// The interpolator options for a grid.
    pub fn options(&self, grid: &Grid) -> Result<Options, Failure> {
        let mut coords: Vec<Coord> = grid.axes().iter().map(Coord::default_for).collect();
        for c in &self.coords {
            let (name, value) = c.split_once('=').ok_or_else(|| {
                Failure::bad_input(anyhow::anyhow!(
                    "--coord '{c}': expected AXIS=linear|log10|theta"
                ))
            })?;
            let a = grid.axis_index(name.trim()).map_err(interp_failure)?;
            coords[a] = Coord::parse(value.trim()).ok_or_else(|| {
                Failure::bad_input(anyhow::anyhow!(
                    "--coord '{c}': coordinate must be linear, log10 or theta"
                ))
            })?;
        }
        Ok(Options {
            method: self.method.into(),
            coords: Some(coords),
            log_value: !self.no_log_value,
            clamp: self.clamp,
        })
    }

    /// The options for one table: the value space as forced by --log-value/--no-log-value,
    /// else log10 exactly when every converged, finite node value of the table is positive.
    pub fn options_for(&self, base: &Options, table: &linegrid::interp::Table) -> Options {
        let log_value = if self.log_value {
            true
        } else if self.no_log_value {
            false
        } else {
            table.all_positive()
        };
        Options {
            log_value,
            ..base.clone()
        }
    }

    /// How the value space was chosen, for output.
    pub fn value_space_rule(&self) -> &'static str {
        if self.log_value {
            "log10"
        } else if self.no_log_value {
            "value"
        } else {
            "auto"
        }
    }
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid sample out/demo.h5 --at temperature=9000,gas_pressure=1e4,metallicity=0\n  linegrid sample out/demo.h5 --points points.csv --line H-beta --gradient --json\n  printf 'temperature,gas_pressure,metallicity\\n7000,3e4,-0.2\\n' | linegrid sample out/demo.h5 --points - --method linear --no-log-value"
)]
pub struct SampleArgs {
    /// The grid file
    grid: PathBuf,
    /// A point: AXIS=VALUE,... naming every axis (repeatable)
    #[arg(long, value_name = "AXIS=VALUE,...")]
    at: Vec<String>,
    /// CSV file of points (header = axis names; '-' = standard input)
    #[arg(long, value_name = "FILE")]
    points: Option<PathBuf>,
    /// Dataset to interpolate (default: equivalent_width, or the first per-line dataset)
    #[arg(long)]
    dataset: Option<String>,
    /// Line of a per-line dataset (repeatable; default: every line)
    #[arg(long = "line", value_name = "LABEL")]
    lines: Vec<String>,
    #[command(flatten)]
    interp: InterpArgs,
    /// Also print the gradient with respect to each axis (physical units)
    #[arg(long)]
    gradient: bool,
    /// Print JSON instead of CSV
    #[arg(long)]
    json: bool,
}

/// Parse `a=1,b=2` into values in axis order.
pub fn parse_at(grid: &Grid, text: &str) -> Result<Vec<f64>, Failure> {
    let names = grid.axis_names();
    let mut v = vec![f64::NAN; names.len()];
    let mut seen = vec![false; names.len()];
    for part in text.split(',').filter(|p| !p.trim().is_empty()) {
        let (k, x) = part.split_once('=').ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "--at '{text}': expected AXIS=VALUE, got '{part}'"
            ))
        })?;
        let a = grid.axis_index(k.trim()).map_err(interp_failure)?;
        let x: f64 = x.trim().parse().map_err(|_| {
            Failure::bad_input(anyhow::anyhow!(
                "--at '{text}': {} = '{}' is not a number",
                k.trim(),
                x.trim()
            ))
        })?;
        if seen[a] {
            return Err(Failure::bad_input(anyhow::anyhow!(
                "--at '{text}': axis '{}' given twice",
                k.trim()
            )));
        }
        seen[a] = true;
        v[a] = x;
    }
    if let Some(missing) = seen.iter().position(|s| !s) {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--at '{text}': axis '{}' missing (every axis needs a value: {})",
            names[missing],
            names.join(", ")
        )));
    }
    Ok(v)
}

/// A small CSV table: the header's trimmed names and the data rows as (0-based line number,
/// text); blank lines and lines starting with '#' are skipped.
pub type CsvRows<'a> = Vec<(usize, &'a str)>;

/// Split CSV text into header names and data rows (`what` words the missing header).
pub fn csv_table<'a>(
    text: &'a str,
    source: &str,
    what: &str,
) -> Result<(Vec<&'a str>, CsvRows<'a>), Failure> {
    let mut rows = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'));
    let (_, header) = rows
        .next()
        .ok_or_else(|| Failure::bad_input(anyhow::anyhow!("{source}: empty: expected {what}")))?;
    Ok((header.split(',').map(str::trim).collect(), rows.collect()))
}

/// Parse a CSV of points (header = axis names, any order) into values in axis order.
pub fn parse_points_csv(grid: &Grid, text: &str, source: &str) -> Result<Vec<Vec<f64>>, Failure> {
    let bad = |m: String| Failure::bad_input(anyhow::anyhow!("{source}: {m}"));
    let (names, rows) = csv_table(text, source, "a header of axis names")?;
    let mut cols = Vec::with_capacity(names.len());
    for (c, n) in names.iter().enumerate() {
        let a = grid
            .axis_index(n)
            .map_err(|e| bad(format!("header column {}: {e}", c + 1)))?;
        if cols.contains(&a) {
            return Err(bad(format!("header column {}: axis '{n}' repeated", c + 1)));
        }
        cols.push(a);
    }
    let axes = grid.axis_names();
    if cols.len() != axes.len() {
        let missing: Vec<&str> = axes
            .iter()
            .enumerate()
            .filter(|(i, _)| !cols.contains(i))
            .map(|(_, n)| n.as_str())
            .collect();
        return Err(bad(format!("header lacks axis {}", missing.join(", "))));
    }
    let mut out = Vec::new();
    for (lineno, row) in rows {
        let fields: Vec<&str> = row.split(',').map(str::trim).collect();
        if fields.len() != cols.len() {
            return Err(bad(format!(
                "row {} (line {}): {} fields, the header has {}",
                out.len() + 1,
                lineno + 1,
                fields.len(),
                cols.len()
            )));
        }
        let mut p = vec![0.0; cols.len()];
        for (c, f) in fields.iter().enumerate() {
            p[cols[c]] = f.parse().map_err(|_| {
                bad(format!(
                    "row {} (line {}), column {} ({}): '{f}' is not a number",
                    out.len() + 1,
                    lineno + 1,
                    c + 1,
                    names[c]
                ))
            })?;
        }
        out.push(p);
    }
    Ok(out)
}

/// Read a text file or standard input ('-').
pub fn read_text(path: &Path) -> Result<String, Failure> {
    if path == Path::new("-") {
        let mut s = String::new();
        std::io::stdin()
            .read_to_string(&mut s)
            .map_err(|e| Failure::bad_input(anyhow::anyhow!("standard input: {e}")))?;
        Ok(s)
    } else {
        std::fs::read_to_string(path).map_err(|e| {
            Failure::bad_input(anyhow::anyhow!("{}: cannot read: {e}", path.display()))
        })
    }
}

/// Format a float for CSV (shortest round-trip form).
fn num(x: f64) -> String {
    format!("{x:e}")
}

pub fn run(a: SampleArgs) -> Result<(), Failure> {
    let grid = Grid::open(&a.grid).map_err(interp_failure)?;
    let mut points = Vec::new();
    for s in &a.at {
        points.push(parse_at(&grid, s)?);
    }
    if let Some(p) = &a.points {
        let source = if p == Path::new("-") {
            "standard input".to_string()
        } else {
            p.display().to_string()
        };
        points.extend(parse_points_csv(&grid, &read_text(p)?, &source)?);
    }
    if points.is_empty() {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "no points: give --at AXIS=VALUE,... or --points FILE"
        )));
    }
    let dataset = match &a.dataset {
        Some(d) => d.clone(),
        None => grid.default_dataset().ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "the grid has no per-line dataset; name --dataset"
            ))
        })?,
    };
    let per_line = grid
        .datasets()
        .iter()
        .find(|d| d.name == dataset)
        .is_some_and(|d| d.per_line);
    let lines: Vec<Option<String>> = if !per_line {
        if !a.lines.is_empty() {
            // Let the library word the error.
            grid.table(&dataset, Some(&a.lines[0]))
                .map_err(interp_failure)?;
        }
        vec![None]
    } else if a.lines.is_empty() {
        grid.lines().iter().map(|l| Some(l.label.clone())).collect()
    } else {
        a.lines.iter().map(|l| Some(l.clone())).collect()
    };
    let options = a.interp.options(&grid)?;
    let axes = grid.axis_names();
    let tables = if per_line {
        let labels: Vec<&str> = lines.iter().flatten().map(String::as_str).collect();
        grid.tables(&dataset, &labels)
    } else {
        grid.table(&dataset, None).map(|t| vec![t])
    }
    .map_err(interp_failure)?;
    let mut results = Vec::new();
    let mut linear_lines: Vec<String> = Vec::new();
    for (line, table) in lines.iter().zip(&tables) {
        let opts = a.interp.options_for(&options, table);
        if !opts.log_value {
            linear_lines.push(line.clone().unwrap_or_else(|| dataset.clone()));
        }
        let ip = Interpolator::new(table, &opts).map_err(interp_failure)?;
        let samples = ip.evaluate_many(&points);
        for (p, s) in points.iter().zip(samples) {
            results.push((line.clone(), p.clone(), s.map_err(interp_failure)?));
        }
    }
    if a.json {
        let rows: Vec<serde_json::Value> = results
            .iter()
            .map(|(line, p, s)| {
                let point: serde_json::Map<String, serde_json::Value> = axes
                    .iter()
                    .zip(p)
                    .map(|(n, &x)| (n.clone(), json!(x)))
                    .collect();
                let mut o = json!({ "point": point, "line": line, "value": s.value });
                if a.gradient {
                    let g: serde_json::Map<String, serde_json::Value> = axes
                        .iter()
                        .zip(&s.gradient)
                        .map(|(n, &x)| (n.clone(), json!(x)))
                        .collect();
                    o["gradient"] = json!(g);
                }
                if s.clamped.iter().any(|&c| c) {
                    let c: Vec<&String> = axes
                        .iter()
                        .zip(&s.clamped)
                        .filter(|(_, c)| **c)
                        .map(|(n, _)| n)
                        .collect();
                    o["clamped"] = json!(c);
                }
                o
            })
            .collect();
        let coords: serde_json::Map<String, serde_json::Value> = axes
            .iter()
            .zip(options.coords.as_deref().unwrap_or(&[]))
            .map(|(n, c)| (n.clone(), json!(c.name())))
            .collect();
        return print_json(&json!({
            "grid": a.grid.display().to_string(),
            "dataset": dataset,
            "method": options.method.name(),
            "value_space": a.interp.value_space_rule(),
            "log_value": linear_lines.is_empty(),
            "linear_value_lines": linear_lines,
            "coords": coords,
            "samples": rows,
        }));
    }
    if !linear_lines.is_empty() && a.interp.value_space_rule() == "auto" {
        eprintln!(
            "linegrid: note: interpolated in the value itself, not its log10 (zero or negative values in the grid): {}",
            linear_lines.join(", ")
        );
    }
    let mut o = String::new();
    let mut header: Vec<String> = axes.clone();
    if per_line {
        header.push("line".into());
    }
    header.push(dataset.clone());
    if a.gradient {
        header.extend(axes.iter().map(|n| format!("d_{dataset}_d_{n}")));
    }
    outln!(o, "{}", header.join(","));
    for (line, p, s) in &results {
        let mut row: Vec<String> = p.iter().map(|&x| num(x)).collect();
        if let Some(l) = line {
            row.push(if l.contains(',') {
                format!("\"{l}\"")
            } else {
                l.clone()
            });
        }
        row.push(num(s.value));
        if a.gradient {
            row.extend(s.gradient.iter().map(|&g| num(g)));
        }
        outln!(o, "{}", row.join(","));
    }
    emit(&o)
}
