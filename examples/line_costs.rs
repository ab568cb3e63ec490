//! Cost accounting of a grid spec's line formation: for every point of the plan, the state
//! solve and the line strengths are timed separately, and the profile evaluations of the
//! equivalent-width integral (`LineStrength::evaluations`) are averaged per line.
//!
//! Usage: cargo run --release --example line_costs -- SPEC.toml

use linegrid::atoms::AtomicData;
use linegrid::grid::plan::Plan;
use linegrid::grid::spec::Spec;
use std::time::Instant;

fn main() {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: line_costs SPEC.toml");
        std::process::exit(2);
    };
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| {
        eprintln!("{path}: {e}");
        std::process::exit(2);
    });
    let base = std::path::Path::new(&path)
        .parent()
        .unwrap_or(std::path::Path::new("."));
    let plan = Spec::parse(&text, &path, base)
        .map_err(|e| e.to_string())
        .and_then(|s| Plan::new(s).map_err(|e| e.to_string()))
        .unwrap_or_else(|e| {
            eprintln!("{e}");
            std::process::exit(2);
        });
    let data = AtomicData::embedded();
    let lines: Vec<_> = plan.lines.iter().collect();
    let (mut t_state, mut t_lines) = (0.0, 0.0);
    let mut evaluations = vec![0usize; lines.len()];
    let mut points = 0usize;
    let mut counts: std::collections::BTreeMap<usize, usize> = Default::default();
    let start = Instant::now();
    for i in 0..plan.point_count() {
        let inputs = plan.point(i);
        let t0 = Instant::now();
        let Ok(state) = linegrid::eos::solve_with(data, &inputs.state) else {
            continue;
        };
        let t1 = Instant::now();
        let Ok(strengths) = linegrid::formation::line_strengths(data, &state, &inputs.slab, &lines)
        else {
            continue;
        };
        t_state += (t1 - t0).as_secs_f64();
        t_lines += t1.elapsed().as_secs_f64();
        for (e, s) in evaluations.iter_mut().zip(&strengths) {
            *e += s.evaluations;
            *counts.entry(s.evaluations).or_default() += 1;
        }
        points += 1;
    }
    let n = points.max(1) as f64;
    println!(
        "{points} points in {:.3} s: state {:.2} us per point, lines {:.2} us per line-point",
        start.elapsed().as_secs_f64(),
        1e6 * t_state / n,
        1e6 * t_lines / (n * lines.len().max(1) as f64)
    );
    for (l, e) in lines.iter().zip(&evaluations) {
        println!("  {:16} mean evaluations {:.1}", l.label, *e as f64 / n);
    }
    println!(
        "  all lines        mean evaluations {:.1}",
        evaluations.iter().sum::<usize>() as f64 / (n * lines.len().max(1) as f64)
    );
    let total: usize = counts.values().sum();
    println!("  evaluations per line: share of lines");
    for (e, c) in &counts {
        let share = *c as f64 / total.max(1) as f64;
        if share >= 0.005 {
            println!("    {e:6} {:5.1} %", 100.0 * share);
        }
    }
}
