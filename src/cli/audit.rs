//! `linegrid audit`: how well does interpolation reproduce the exact physics between nodes?
//!
//! The plan is rebuilt from the spec text stored in the file; the physics is recomputed at
//! cell centres (the midpoint of each cell in the interpolation coordinates) and at the
//! midpoints of each cell's edges along one axis at a time (the other axes on nodes, which
//! isolates each axis' contribution), then compared with multilinear and cubic interpolation.

use std::path::{Path, PathBuf};

use clap::Args;
use rayon::prelude::*;
use serde_json::json;

use linegrid::grid::model;
use linegrid::grid::plan::Plan;
use linegrid::grid::spec::Spec;
use linegrid::interp::{Coord, Grid, Interpolator, Method, Options};

use super::sample::interp_failure;
use super::{Failure, emit, print_json};

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid audit out/demo.h5\n  linegrid audit out/demo.h5 --samples 200 --seed 7 --json\n  linegrid audit out/demo.h5 --dataset central_depth --no-log-value"
)]
pub struct AuditArgs {
    #[command(flatten)]
    setup: AuditSetup,
    /// How many refinement suggestions to print
    #[arg(long, default_value_t = 8, value_name = "N")]
    top: usize,
    /// Print JSON
    #[arg(long)]
    json: bool,
}

/// What to audit (shared with `linegrid plot audit`).
#[derive(Args)]
pub struct AuditSetup {
    /// The grid file
    pub grid: PathBuf,
    /// Cells to test (all cells when the grid has at most this many; else a seeded sample)
    #[arg(long, default_value_t = 500, value_name = "N")]
    pub samples: usize,
    /// Seed of the cell sample
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Per-line dataset to audit (default: equivalent_width, or the first per-line dataset)
    #[arg(long)]
    pub dataset: Option<String>,
    /// Interpolate the value linearly rather than in log10 (the default is log10)
    #[arg(long)]
    pub no_log_value: bool,
}

/// One relative interpolation error: at the centre of `cell` (`axis` None) or at the
/// midpoint of its edge along `axis`, for line `line`, scheme `method` (0 linear, 1 cubic).
#[derive(Debug, Clone, Copy)]
pub struct AuditRecord {
    /// Flat cell index (row-major over the cell shape).
    pub cell: usize,
    /// Edge axis, or None at the centre.
    pub axis: Option<usize>,
    /// Line index.
    pub line: usize,
    /// 0 multilinear, 1 cubic.
    pub method: usize,
    /// |interpolated − exact| / |exact|.
    pub error: f64,
}

/// The audit's measurements before any summary.
pub struct Audit {
    /// The grid.
    pub grid: Grid,
    /// The dataset audited.
    pub dataset: String,
    /// Line labels.
    pub lines: Vec<String>,
    /// Interpolation coordinate per axis.
    pub coords: Vec<Coord>,
    /// Interpolated in log10 of the value.
    pub log_value: bool,
    /// Cells per axis.
    pub cell_shape: Vec<usize>,
    /// Cells tested (flat indices, ascending).
    pub cells: Vec<usize>,
    /// Whether `cells` is a seeded sample.
    pub sampled: bool,
    /// Physics evaluations made.
    pub evaluations: usize,
    /// Points skipped (not converged).
    pub skipped: usize,
    /// Interpolations refused (flagged stencil).
    pub refused: usize,
    /// Today's physics against the stored nodes (first and last point), max relative.
    pub node_check: f64,
    /// Every error measured.
    pub records: Vec<AuditRecord>,
}

impl Audit {
    /// Cell indices per axis of a flat cell index.
    pub fn unravel(&self, mut f: usize) -> Vec<usize> {
        let nd = self.cell_shape.len();
        let mut idx = vec![0; nd];
        for d in (0..nd).rev() {
            idx[d] = f % self.cell_shape[d];
            f /= self.cell_shape[d];
        }
        idx
    }

    /// Midpoint between nodes i, i+1 of axis d in its coordinate, mapped back.
    pub fn mid(&self, d: usize, i: usize) -> f64 {
        let v = &self.grid.axes()[d].values;
        match self.coords[d] {
            Coord::Linear => 0.5 * (v[i] + v[i + 1]),
            Coord::Log10 => (v[i] * v[i + 1]).sqrt(),
            Coord::Theta => 2.0 / (1.0 / v[i] + 1.0 / v[i + 1]),
        }
    }
}

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA "Fast splittable pseudorandom number
/// generators"): a small seeded generator.
pub struct SplitMix(pub u64);

impl SplitMix {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// Rebuild the plan of a grid file from its stored spec text.
pub fn plan_of(grid: &Grid) -> Result<Plan, Failure> {
    let path = grid.path();
    let text = grid.file().attribute("spec_text").ok_or_else(|| {
        Failure::bad_input(anyhow::anyhow!(
            "{}: no spec_text attribute; cannot rebuild the plan",
            path.display()
        ))
    })?;
    let base = path.parent().unwrap_or(Path::new("."));
    let name = format!("{} (spec_text)", path.display());
    let spec = Spec::parse(&text, &name, base).map_err(Failure::failed)?;
    let plan = Plan::new(spec).map_err(Failure::failed)?;
    let same = plan.axes.len() == grid.axes().len()
        && plan.axes.iter().zip(grid.axes()).all(|(p, a)| {
            p.name == a.name
                && p.values.values().len() == a.values.len()
                && p.values
                    .values()
                    .iter()
                    .zip(&a.values)
                    .all(|(x, y)| x.to_bits() == y.to_bits())
        });
    if !same {
        return Err(Failure::failed(anyhow::anyhow!(
            "{}: the stored spec does not reproduce the file's axes",
            path.display()
        )));
    }
    Ok(plan)
}

fn quantiles(mut v: Vec<f64>) -> (f64, f64, f64) {
    if v.is_empty() {
        return (f64::NAN, f64::NAN, f64::NAN);
    }
    v.sort_by(f64::total_cmp);
    let q = |p: f64| v[((v.len() - 1) as f64 * p).round() as usize];
    (q(0.5), q(0.95), v[v.len() - 1])
}

/// Recompute the physics at the audit points and measure every interpolation error.
pub fn measure(a: &AuditSetup) -> Result<Audit, Failure> {
    let grid = Grid::open(&a.grid).map_err(interp_failure)?;
    let plan = plan_of(&grid)?;
    let quantities = model::quantities(&plan);
    let dataset = match &a.dataset {
        Some(d) => d.clone(),
        None => grid.default_dataset().ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!("the grid has no per-line dataset"))
        })?,
    };
    let qi = quantities
        .iter()
        .position(|q| q.name == dataset && q.per_line)
        .ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "{}: '{dataset}' is not a per-line dataset of this grid",
                a.grid.display()
            ))
        })?;
    let nd = grid.axes().len();
    let lines: Vec<String> = grid.lines().iter().map(|l| l.label.clone()).collect();
    let log_value = !a.no_log_value;
    let coords: Vec<Coord> = grid.axes().iter().map(Coord::default_for).collect();
    let labels: Vec<&str> = lines.iter().map(String::as_str).collect();
    let tables = grid.tables(&dataset, &labels).map_err(interp_failure)?;
    let mut interps = Vec::new(); // [method][line]
    for m in [Method::Linear, Method::Cubic] {
        let mut v = Vec::new();
        for t in &tables {
            let o = Options {
                method: m,
                coords: Some(coords.clone()),
                log_value,
                clamp: false,
            };
            v.push(Interpolator::new(t, &o).map_err(interp_failure)?);
        }
        interps.push(v);
    }
    // Cells, all or a seeded sample.
    let cell_shape: Vec<usize> = grid.axes().iter().map(|x| x.values.len() - 1).collect();
    let n_cells: usize = cell_shape.iter().product();
    let mut cells: Vec<usize> = (0..n_cells).collect();
    let sampled = n_cells > a.samples;
    if sampled {
        let mut rng = SplitMix(a.seed);
        for i in 0..a.samples {
            let j = i + (rng.next_u64() % (n_cells - i) as u64) as usize;
            cells.swap(i, j);
        }
        cells.truncate(a.samples);
        cells.sort_unstable();
    }
    let mut audit = Audit {
        grid,
        dataset,
        lines,
        coords,
        log_value,
        cell_shape,
        cells,
        sampled,
        evaluations: 0,
        skipped: 0,
        refused: 0,
        node_check: 0.0,
        records: Vec::new(),
    };
    // Points: per cell, the centre (kind None) and each axis' edge midpoint (kind Some(d)).
    let mut points: Vec<(usize, Option<usize>, Vec<f64>)> = Vec::new();
    for &c in &audit.cells {
        let idx = audit.unravel(c);
        let centre: Vec<f64> = (0..nd).map(|d| audit.mid(d, idx[d])).collect();
        points.push((c, None, centre));
        for e in 0..nd {
            let p: Vec<f64> = (0..nd)
                .map(|d| {
                    if d == e {
                        audit.mid(d, idx[d])
                    } else {
                        audit.grid.axes()[d].values[idx[d]]
                    }
                })
                .collect();
            points.push((c, Some(e), p));
        }
    }
    let exact: Vec<model::PointValues> = points
        .par_iter()
        .map(|(_, _, p)| model::evaluate_at(&plan, &quantities, p))
        .collect();
    // Check: the physics of today reproduces the stored nodes (first and last point).
    let stored = audit.grid.read(&audit.dataset).map_err(interp_failure)?;
    for flat in [0, plan.point_count() - 1] {
        let pv = model::evaluate(&plan, &quantities, flat);
        let idx = plan.unravel(flat);
        for (k, &x) in pv.values[qi].iter().enumerate() {
            let mut full = idx.clone();
            full.push(k);
            let s = stored[full.as_slice()];
            if x.is_finite() && s.is_finite() && s != 0.0 {
                audit.node_check = audit.node_check.max(((x - s) / s).abs());
            }
        }
    }
    audit.evaluations = points.len();
    for ((c, kind, p), ex) in points.iter().zip(&exact) {
        if ex.status != 0 {
            audit.skipped += 1;
            continue;
        }
        for k in 0..audit.lines.len() {
            let truth = ex.values[qi][k];
            if !truth.is_finite() || truth == 0.0 {
                continue;
            }
            for (m, ips) in interps.iter().enumerate() {
                let Ok(s) = ips[k].evaluate(p) else {
                    audit.refused += 1;
                    continue;
                };
                audit.records.push(AuditRecord {
                    cell: *c,
                    axis: *kind,
                    line: k,
                    method: m,
                    error: ((s.value - truth) / truth).abs(),
                });
            }
        }
    }
    Ok(audit)
}

pub fn run(a: AuditArgs) -> Result<(), Failure> {
    let audit = measure(&a.setup)?;
    let (grid, lines, coords, log_value) =
        (&audit.grid, &audit.lines, &audit.coords, audit.log_value);
    let dataset = &audit.dataset;
    let nd = grid.axes().len();
    let n_cells: usize = audit.cell_shape.iter().product();
    let (cells, sampled, skipped, interp_failed, node_check) = (
        &audit.cells,
        audit.sampled,
        audit.skipped,
        audit.refused,
        audit.node_check,
    );
    let unravel = |f: usize| audit.unravel(f);
    let mid = |d: usize, i: usize| audit.mid(d, i);
    // Relative errors: [method][line] at centres; [method][axis] at edge midpoints.
    let mut centre_err = vec![vec![Vec::new(); lines.len()]; 2];
    let mut axis_err = vec![vec![Vec::new(); nd]; 2];
    let mut cell_worst: std::collections::BTreeMap<usize, (f64, String)> = Default::default();
    let mut edge_worst: Vec<(f64, usize, usize, String)> = Vec::new(); // (err, cell, axis, line)
    for r in &audit.records {
        let (m, k, err) = (r.method, r.line, r.error);
        let line = &lines[k];
        match r.axis {
            None => {
                centre_err[m][k].push(err);
                if m == 0 {
                    let w = cell_worst.entry(r.cell).or_insert((0.0, String::new()));
                    if err > w.0 {
                        *w = (err, line.clone());
                    }
                }
            }
            Some(d) => {
                axis_err[m][d].push(err);
                if m == 0 {
                    edge_worst.push((err, r.cell, d, line.clone()));
                }
            }
        }
    }
    let methods = ["linear", "cubic"];
    let axes = grid.axis_names();
    let per_line: Vec<serde_json::Value> = lines
        .iter()
        .enumerate()
        .map(|(k, l)| {
            let mut o = json!({ "line": l, "points": centre_err[0][k].len() });
            for (m, name) in methods.iter().enumerate() {
                let (med, p95, max) = quantiles(centre_err[m][k].clone());
                o[*name] = json!({ "median": med, "p95": p95, "max": max });
            }
            o
        })
        .collect();
    let per_axis: Vec<serde_json::Value> = axes
        .iter()
        .enumerate()
        .map(|(d, n)| {
            let mut o =
                json!({ "axis": n, "coord": coords[d].name(), "points": axis_err[0][d].len() });
            for (m, name) in methods.iter().enumerate() {
                let (med, p95, max) = quantiles(axis_err[m][d].clone());
                o[*name] = json!({ "median": med, "p95": p95, "max": max });
            }
            o
        })
        .collect();
    // Refinement: the edge intervals with the largest multilinear error; a new node at the
    // interval's midpoint is where refinement pays most.
    edge_worst.sort_by(|x, y| y.0.total_cmp(&x.0));
    let mut seen = std::collections::BTreeSet::new();
    let mut suggestions = Vec::new();
    for (err, c, d, line) in &edge_worst {
        let idx = unravel(*c);
        if !seen.insert((*d, idx[*d])) {
            continue;
        }
        let v = &grid.axes()[*d].values;
        suggestions.push(json!({
            "axis": axes[*d],
            "between": [v[idx[*d]], v[idx[*d] + 1]],
            "new_node": mid(*d, idx[*d]),
            "linear_error": err,
            "line": line,
        }));
        if suggestions.len() >= a.top {
            break;
        }
    }
    let mut worst_cells: Vec<(usize, f64, String)> = cell_worst
        .into_iter()
        .map(|(c, (e, l))| (c, e, l))
        .collect();
    worst_cells.sort_by(|x, y| y.1.total_cmp(&x.1));
    let worst_cells: Vec<serde_json::Value> = worst_cells
        .iter()
        .take(a.top)
        .map(|(c, e, l)| {
            let idx = unravel(*c);
            let lo: serde_json::Map<String, serde_json::Value> = axes
                .iter()
                .enumerate()
                .map(|(d, n)| {
                    (
                        n.clone(),
                        json!([
                            grid.axes()[d].values[idx[d]],
                            grid.axes()[d].values[idx[d] + 1]
                        ]),
                    )
                })
                .collect();
            json!({ "cell": lo, "linear_error": e, "line": l })
        })
        .collect();
    if a.json {
        return print_json(&json!({
            "grid": a.setup.grid.display().to_string(),
            "dataset": dataset,
            "log_value": log_value,
            "cells": n_cells,
            "cells_tested": cells.len(),
            "sampled": sampled,
            "seed": a.setup.seed,
            "physics_evaluations": audit.evaluations,
            "skipped_not_converged": skipped,
            "interpolation_refused": interp_failed,
            "node_check_max_relative_difference": node_check,
            "per_line": per_line,
            "per_axis": per_axis,
            "refine_intervals": suggestions,
            "worst_cells": worst_cells,
        }));
    }
    let mut o = String::new();
    outln!(
        o,
        "{}: {dataset}, relative error of interpolation ({}) against the direct solver",
        a.setup.grid.display(),
        if log_value {
            "in log10 of the value"
        } else {
            "in the value"
        }
    );
    outln!(
        o,
        "cells tested: {} of {n_cells}{}; physics evaluations: {}; skipped (not converged): {skipped}; interpolations refused (flagged stencil): {interp_failed}",
        cells.len(),
        if sampled {
            format!(" (seeded sample, seed {})", a.setup.seed)
        } else {
            String::new()
        },
        audit.evaluations
    );
    outln!(
        o,
        "node check (today's physics vs stored nodes): max relative difference {node_check:.1e}"
    );
    outln!(o);
    outln!(o, "at cell centres, per line:");
    outln!(
        o,
        "  {:<14} {:>9} {:>9} {:>9}   {:>9} {:>9} {:>9}",
        "line",
        "lin med",
        "lin p95",
        "lin max",
        "cub med",
        "cub p95",
        "cub max"
    );
    let row = |v: &serde_json::Value| {
        let f = |m: &str, q: &str| v[m][q].as_f64().unwrap_or(f64::NAN);
        format!(
            "{:>9.2e} {:>9.2e} {:>9.2e}   {:>9.2e} {:>9.2e} {:>9.2e}",
            f("linear", "median"),
            f("linear", "p95"),
            f("linear", "max"),
            f("cubic", "median"),
            f("cubic", "p95"),
            f("cubic", "max")
        )
    };
    for v in &per_line {
        outln!(o, "  {:<14} {}", v["line"].as_str().unwrap_or(""), row(v));
    }
    outln!(o);
    outln!(o, "at edge midpoints, per axis (all lines):");
    for v in &per_axis {
        outln!(
            o,
            "  {:<14} {}  ({})",
            v["axis"].as_str().unwrap_or(""),
            row(v),
            v["coord"].as_str().unwrap_or("")
        );
    }
    outln!(o);
    outln!(
        o,
        "refinement pays most (largest multilinear error along one axis; add the node):"
    );
    for s in &suggestions {
        outln!(
            o,
            "  {} between {} and {}: add {:.6}  (error {:.2e}, {})",
            s["axis"].as_str().unwrap_or(""),
            s["between"][0],
            s["between"][1],
            s["new_node"].as_f64().unwrap_or(f64::NAN),
            s["linear_error"].as_f64().unwrap_or(f64::NAN),
            s["line"].as_str().unwrap_or("")
        );
    }
    outln!(o);
    outln!(o, "worst cells (multilinear, at the centre):");
    for c in &worst_cells {
        let cell: Vec<String> = c["cell"]
            .as_object()
            .map(|m| {
                m.iter()
                    .map(|(k, v)| format!("{k} {}..{}", v[0], v[1]))
                    .collect()
            })
            .unwrap_or_default();
        outln!(
            o,
            "  {}: {:.2e} ({})",
            cell.join(", "),
            c["linear_error"].as_f64().unwrap_or(f64::NAN),
            c["line"].as_str().unwrap_or("")
        );
    }
    emit(&o)
}
