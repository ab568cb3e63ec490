//! `linegrid fit`: fit observed line strengths with the grid (Levenberg–Marquardt from
//! several seeded starts; every distinct local minimum is reported).

use std::path::{Path, PathBuf};

use clap::Args;
use serde_json::json;

use linegrid::interp::fit::{FitOptions, fit};
use linegrid::interp::{Grid, Interpolator};

use super::sample::{InterpArgs, csv_table, interp_failure, read_text};
use super::{Failure, emit, print_json};

#[derive(Args)]
#[command(
    after_help = "OBSERVED.csv has the header line,value,uncertainty (value in the dataset's units).\n\nExamples:\n  linegrid fit out/demo.h5 observed.csv\n  linegrid fit out/demo.h5 observed.csv --fix gas_pressure=1e4 --fix metallicity=0 --json\n  linegrid fit out/demo.h5 - --starts 32 --seed 7 < observed.csv"
)]
pub struct FitArgs {
    /// The grid file
    grid: PathBuf,
    /// Observations: CSV with columns line,value,uncertainty ('-' = standard input)
    observed: PathBuf,
    /// Dataset the observations measure (default: equivalent_width)
    #[arg(long)]
    dataset: Option<String>,
    /// Hold an axis at a value: AXIS=VALUE (repeatable)
    #[arg(long = "fix", value_name = "AXIS=VALUE")]
    fix: Vec<String>,
    /// Random starting points (plus the best point of a coarse lattice)
    #[arg(long, default_value_t = 16)]
    starts: usize,
    /// Seed of the starting points
    #[arg(long, default_value_t = 1)]
    seed: u64,
    #[command(flatten)]
    interp: InterpArgs,
    /// Print JSON
    #[arg(long)]
    json: bool,
}

/// Parse the observations CSV: (line, value, uncertainty) rows.
fn parse_observed(text: &str, source: &str) -> Result<Vec<(String, f64, f64)>, Failure> {
    let bad = |m: String| Failure::bad_input(anyhow::anyhow!("{source}: {m}"));
    let (names, rows) = csv_table(text, source, "the header line,value,uncertainty")?;
    let col = |n: &str| {
        names.iter().position(|h| *h == n).ok_or_else(|| {
            bad(format!(
                "header lacks column '{n}' (need line,value,uncertainty)"
            ))
        })
    };
    let (cl, cv, cu) = (col("line")?, col("value")?, col("uncertainty")?);
    let mut out = Vec::new();
    for (lineno, row) in rows {
        let f: Vec<&str> = row.split(',').map(str::trim).collect();
        let r = out.len() + 1;
        if f.len() != names.len() {
            return Err(bad(format!(
                "row {r} (line {}): {} fields, the header has {}",
                lineno + 1,
                f.len(),
                names.len()
            )));
        }
        let num = |c: usize| -> Result<f64, Failure> {
            f[c].parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| {
                    bad(format!(
                        "row {r} (line {}), column {} ({}): '{}' is not a number",
                        lineno + 1,
                        c + 1,
                        names[c],
                        f[c]
                    ))
                })
        };
        let (v, u) = (num(cv)?, num(cu)?);
        if u <= 0.0 {
            return Err(bad(format!(
                "row {r} (line {}), column {} (uncertainty): must be positive, got {u}",
                lineno + 1,
                cu + 1
            )));
        }
        out.push((f[cl].trim_matches('"').to_string(), v, u));
    }
    if out.is_empty() {
        return Err(bad("no observations".into()));
    }
    Ok(out)
}

pub fn run(a: FitArgs) -> Result<(), Failure> {
    let grid = Grid::open(&a.grid).map_err(interp_failure)?;
    let source = if a.observed == Path::new("-") {
        "standard input".to_string()
    } else {
        a.observed.display().to_string()
    };
    let obs = parse_observed(&read_text(&a.observed)?, &source)?;
    let dataset = match &a.dataset {
        Some(d) => d.clone(),
        None => grid.default_dataset().ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "the grid has no per-line dataset; name --dataset"
            ))
        })?,
    };
    let options = a.interp.options(&grid)?;
    let axes = grid.axis_names();
    let mut fixed = vec![None; axes.len()];
    for f in &a.fix {
        let (k, v) = f.split_once('=').ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!("--fix '{f}': expected AXIS=VALUE"))
        })?;
        let d = grid.axis_index(k.trim()).map_err(interp_failure)?;
        let x: f64 = v.trim().parse().map_err(|_| {
            Failure::bad_input(anyhow::anyhow!(
                "--fix '{f}': '{}' is not a number",
                v.trim()
            ))
        })?;
        let ax = &grid.axes()[d].values;
        let (lo, hi) = ax
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &v| {
                (l.min(v), h.max(v))
            });
        if !(lo..=hi).contains(&x) {
            return Err(Failure::bad_input(anyhow::anyhow!(
                "--fix '{f}': {} = {x} is outside the grid's range [{lo}, {hi}]",
                k.trim()
            )));
        }
        fixed[d] = Some(x);
    }
    if fixed.iter().all(Option::is_some) {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--fix holds every axis: nothing left to fit"
        )));
    }
    let labels: Vec<&str> = obs.iter().map(|o| o.0.as_str()).collect();
    let mut interps = Vec::new();
    let mut linear_lines: Vec<String> = Vec::new();
    for (t, label) in grid
        .tables(&dataset, &labels)
        .map_err(interp_failure)?
        .into_iter()
        .zip(&labels)
    {
        let opts = a.interp.options_for(&options, &t);
        if !opts.log_value {
            linear_lines.push(label.to_string());
        }
        interps.push(Interpolator::new(&t, &opts).map_err(interp_failure)?);
    }
    let refs: Vec<&Interpolator> = interps.iter().collect();
    let y: Vec<f64> = obs.iter().map(|o| o.1).collect();
    let s: Vec<f64> = obs.iter().map(|o| o.2).collect();
    let res = fit(
        &refs,
        &y,
        &s,
        &fixed,
        &FitOptions {
            starts: a.starts,
            seed: a.seed,
            ..FitOptions::default()
        },
    );
    if res.minima.is_empty() {
        return Err(Failure::failed(anyhow::anyhow!(
            "{}: no start could be evaluated ({} starts touched flagged nodes)",
            a.grid.display(),
            res.failed_starts
        )));
    }
    let free: Vec<&String> = axes
        .iter()
        .zip(&fixed)
        .filter(|(_, f)| f.is_none())
        .map(|(n, _)| n)
        .collect();
    if a.json {
        let minima: Vec<serde_json::Value> = res
            .minima
            .iter()
            .map(|m| {
                let p: serde_json::Map<String, serde_json::Value> = axes
                    .iter()
                    .enumerate()
                    .map(|(d, n)| {
                        (
                            n.clone(),
                            json!({
                                "value": m.parameters[d],
                                "uncertainty": m.uncertainties[d],
                                "fixed": fixed[d].is_some(),
                            }),
                        )
                    })
                    .collect();
                json!({
                    "parameters": p,
                    "chi2": m.chi2,
                    "reduced_chi2": m.reduced_chi2,
                    "covariance": m.covariance,
                    "at_edge": m.at_edge,
                    "starts": m.hits,
                })
            })
            .collect();
        return print_json(&json!({
            "grid": a.grid.display().to_string(),
            "dataset": dataset,
            "method": options.method.name(),
            "value_space": a.interp.value_space_rule(),
            "log_value": linear_lines.is_empty(),
            "linear_value_lines": linear_lines,
            "observations": obs.len(),
            "free_axes": free,
            "degenerate": res.degenerate,
            "failed_starts": res.failed_starts,
            "minima": minima,
        }));
    }
    let mut o = String::new();
    outln!(
        o,
        "{}: {} observations of {dataset}, free axes: {} ({} interpolation{})",
        a.grid.display(),
        obs.len(),
        free.iter()
            .map(|s| s.as_str())
            .collect::<Vec<_>>()
            .join(", "),
        options.method.name(),
        match (linear_lines.is_empty(), interps.len() == linear_lines.len()) {
            (true, _) => " in log10 of the value".to_string(),
            (false, true) => String::new(),
            (false, false) => format!(
                " in log10 of the value, except {} (zero or negative values in the grid)",
                linear_lines.join(", ")
            ),
        }
    );
    for (i, m) in res.minima.iter().enumerate() {
        outln!(
            o,
            "minimum {}: chi2 = {:.4}{}  ({} of the starts{})",
            i + 1,
            m.chi2,
            m.reduced_chi2
                .map_or(String::new(), |r| format!(", reduced chi2 = {r:.4}")),
            m.hits,
            if m.at_edge {
                "; on the grid's edge"
            } else {
                ""
            }
        );
        for (d, n) in axes.iter().enumerate() {
            if fixed[d].is_some() {
                outln!(o, "  {n:<16} {:>14.6}  (fixed)", m.parameters[d]);
            } else {
                match m.uncertainties[d] {
                    Some(u) => outln!(o, "  {n:<16} {:>14.6} ± {u:.4}", m.parameters[d]),
                    None => outln!(o, "  {n:<16} {:>14.6} ± unconstrained", m.parameters[d]),
                }
            }
        }
    }
    if res.degenerate {
        outln!(
            o,
            "degenerate: {} distinct minima lie within delta chi2 < 1 of the best; add lines of another family (another ion or element) to separate them",
            res.minima
                .iter()
                .filter(|m| m.chi2 - res.minima[0].chi2 < 1.0)
                .count()
        );
    }
    emit(&o)
}
