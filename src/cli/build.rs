//! `linegrid build`, `describe`, `merge` and `shards`.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::Instant;

use clap::Args;
use serde_json::json;

use linegrid::grid::build::{self as engine, BuildError, BuildOptions};
use linegrid::grid::model;
use linegrid::grid::plan::{Plan, Shard};
use linegrid::grid::spec::Spec;
use linegrid::grid::store::GridFile;

use super::{Failure, emit, print_json};

fn build_failure(e: BuildError) -> Failure {
    if e.is_bad_input() {
        Failure::bad_input(e)
    } else {
        Failure::failed(e)
    }
}

/// Read and validate a spec file into a plan (every problem is bad input, exit 2).
pub fn load_plan(path: &Path) -> Result<Plan, Failure> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        Failure::bad_input(anyhow::anyhow!(
            "{}: cannot read the spec: {e}",
            path.display()
        ))
    })?;
    let base = path.parent().unwrap_or(Path::new("."));
    let spec = Spec::parse(&text, &path.display().to_string(), base).map_err(Failure::bad_input)?;
    Plan::new(spec).map_err(|mut e| {
        e.file = path.display().to_string();
        Failure::bad_input(e)
    })
}

fn parse_shard(s: &str) -> Result<Shard, String> {
    let (i, n) = s
        .split_once('/')
        .ok_or("expected I/N, e.g. 2/8 (shards are numbered from 1)")?;
    let i: usize = i
        .trim()
        .parse()
        .map_err(|_| format!("'{i}' is not a whole number"))?;
    let n: usize = n
        .trim()
        .parse()
        .map_err(|_| format!("'{n}' is not a whole number"))?;
    if n == 0 || i == 0 || i > n {
        return Err(format!("shard {i}/{n}: need 1 <= I <= N"));
    }
    Ok(Shard {
        index: i - 1,
        count: n,
    })
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid build grids/demo.toml\n  linegrid build grids/demo.toml --check\n  linegrid build grids/demo.toml --resume --threads 2\n  linegrid build grids/demo.toml --shard 3/8 --quiet"
)]
pub struct BuildArgs {
    /// The grid spec (TOML)
    spec: PathBuf,
    /// Validate only and print the plan: axes, points, lines, estimated size and run time
    #[arg(long)]
    check: bool,
    /// Continue an interrupted run from its .partial file
    #[arg(long)]
    resume: bool,
    /// Compute only shard I of N (contiguous share of the grid; I from 1)
    #[arg(long, value_name = "I/N", value_parser = parse_shard)]
    shard: Option<Shard>,
    /// Worker threads (0 = all cores)
    #[arg(long, default_value_t = 0, value_name = "N")]
    threads: usize,
    /// Output file (default: the spec's grid.output)
    #[arg(long, value_name = "FILE")]
    output: Option<PathBuf>,
    /// No progress output
    #[arg(long)]
    quiet: bool,
    /// Print the plan (with --check) or the build report as JSON
    #[arg(long)]
    json: bool,
}

fn fmt_range(v: &[f64]) -> String {
    match v {
        [x] => format!("{x}"),
        _ => format!("{} .. {} ({} values)", v[0], v[v.len() - 1], v.len()),
    }
}

pub fn build(a: BuildArgs) -> Result<(), Failure> {
    let plan = load_plan(&a.spec)?;
    let threads = if a.threads == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    } else {
        a.threads
    };
    if a.check {
        return print_plan(&plan, threads, a.json);
    }
    let opts = BuildOptions {
        output: a.output.clone(),
        resume: a.resume,
        shard: a.shard,
        threads,
    };
    let start = Instant::now();
    let tty = std::io::stderr().is_terminal();
    let bar = (!a.quiet && tty).then(|| {
        let b = indicatif::ProgressBar::new(0);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:40} {pos}/{len} points  {per_sec}  ETA {eta}",
            )
            .expect("a valid template"),
        );
        b
    });
    let mut last_line = Instant::now();
    let report = engine::build(&plan, &opts, |done, total| {
        if let Some(b) = &bar {
            b.set_length(total as u64);
            b.set_position(done as u64);
        } else if !a.quiet && (last_line.elapsed().as_secs_f64() > 10.0 || done == total) {
            last_line = Instant::now();
            let rate = done as f64 / start.elapsed().as_secs_f64().max(1e-9);
            let eta = (total - done) as f64 / rate.max(1e-9);
            eprintln!(
                "linegrid: {done}/{total} points ({:.0}%), {rate:.1} points/s, ETA {eta:.0} s",
                100.0 * done as f64 / total.max(1) as f64
            );
        }
    })
    .map_err(build_failure)?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let secs = start.elapsed().as_secs_f64();
    if a.json {
        return print_json(&json!({"report": report, "seconds": secs, "threads": threads}));
    }
    if !a.quiet {
        let mut o = String::new();
        outln!(
            o,
            "wrote {} ({}): {} points in {:.1} s with {threads} thread(s), {} line-points/s{}",
            report.path.display(),
            if report.complete { "complete" } else { "shard" },
            report.points_computed,
            secs,
            (report.points_computed as f64 * plan.lines.len() as f64 / secs.max(1e-9)).round(),
            if report.pencils_reused > 0 {
                format!(
                    ", {} pencils reused from the interrupted run",
                    report.pencils_reused
                )
            } else {
                String::new()
            }
        );
        emit(&o)?;
    }
    Ok(())
}

fn print_plan(plan: &Plan, threads: usize, as_json: bool) -> Result<(), Failure> {
    let q = model::quantities(plan);
    let per_line = q.iter().filter(|x| x.per_line).count();
    let bytes = plan.estimated_bytes(per_line, q.len() - per_line);
    // Time a few points spread over the grid, single-threaded.
    let n = plan.point_count();
    let samples: Vec<usize> = (0..n.min(3)).map(|i| i * n / n.min(3)).collect();
    let t0 = Instant::now();
    let mut flagged = 0;
    for &p in &samples {
        if model::evaluate(plan, &q, p).status != model::status::OK {
            flagged += 1;
        }
    }
    let per_point = t0.elapsed().as_secs_f64() / samples.len().max(1) as f64;
    let est = per_point * n as f64 / threads as f64;
    let (out, _) = engine::output_paths(plan, None, None);
    if as_json {
        return print_json(&json!({
            "title": plan.spec.title,
            "output": out,
            "axes": plan.axes.iter().map(|a| json!({"name": a.name, "units": a.units(), "values": a.values.values()})).collect::<Vec<_>>(),
            "fixed": plan.fixed.iter().map(|a| json!({"name": a.name, "units": a.units(), "value": a.values.values()[0]})).collect::<Vec<_>>(),
            "lines": plan.lines.iter().map(|l| &l.label).collect::<Vec<_>>(),
            "points": n,
            "pencils": plan.pencil_count(),
            "datasets": q.iter().map(|x| &x.name).collect::<Vec<_>>(),
            "estimated_bytes": bytes,
            "estimated_seconds": est,
            "threads": threads,
            "spec_digest": plan.spec.digest(),
        }));
    }
    let mut o = String::new();
    outln!(o, "spec OK: {}", plan.spec.title);
    outln!(o, "output: {}", out.display());
    outln!(o, "axes (storage order):");
    for a in &plan.axes {
        outln!(
            o,
            "  {:<22} {:<10} {}",
            a.name,
            a.units(),
            fmt_range(&a.values.values())
        );
    }
    outln!(o, "fixed:");
    for a in &plan.fixed {
        outln!(
            o,
            "  {:<22} {:<10} {}",
            a.name,
            a.units(),
            a.values.values()[0]
        );
    }
    outln!(
        o,
        "lines ({}): {}",
        plan.lines.len(),
        plan.lines
            .iter()
            .map(|l| l.label.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    );
    outln!(
        o,
        "points: {n} in {} pencils of {}",
        plan.pencil_count(),
        plan.pencil_len()
    );
    outln!(
        o,
        "datasets: {}",
        q.iter()
            .map(|x| x.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    );
    outln!(
        o,
        "estimated file size: {:.1} MB before compression",
        bytes as f64 / 1e6
    );
    outln!(
        o,
        "estimated run time: {:.1} s on {threads} thread(s) ({:.2} ms per point, {} of {} sampled points flagged)",
        est,
        per_point * 1e3,
        flagged,
        samples.len()
    );
    emit(&o)
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid describe out/demo.h5\n  linegrid describe out/demo.h5 --json"
)]
pub struct DescribeArgs {
    /// A grid file
    file: PathBuf,
    /// Print JSON
    #[arg(long)]
    json: bool,
}

pub fn describe(a: DescribeArgs) -> Result<(), Failure> {
    let f = GridFile::open(&a.file).map_err(Failure::bad_input)?;
    let status = f.status().map_err(Failure::bad_input)?;
    let mut counts = std::collections::BTreeMap::new();
    for s in status.iter() {
        *counts.entry(*s).or_insert(0usize) += 1;
    }
    let names: std::collections::BTreeMap<u8, String> = f.status_flags().iter().cloned().collect();
    let physics = f.attribute("physics_options").unwrap_or_default();
    let done = f.done_pencils().map_err(Failure::bad_input)?;
    if a.json {
        let provenance: serde_json::Map<String, serde_json::Value> = [
            "tool",
            "tool_version",
            "created",
            "spec_digest",
            "atomic_data_digest",
        ]
        .iter()
        .map(|k| (k.to_string(), json!(f.attribute(k))))
        .collect();
        let status_counts: serde_json::Map<String, serde_json::Value> = counts
            .iter()
            .map(|(c, n)| {
                (
                    names.get(c).cloned().unwrap_or_else(|| c.to_string()),
                    json!(n),
                )
            })
            .collect();
        return print_json(&json!({
            "file": a.file,
            "title": f.title(),
            "complete": f.is_complete(),
            "pencils_done": done.iter().filter(|d| **d).count(),
            "pencils": done.len(),
            "axes": f.axes().iter().map(|x| json!({"name": x.name, "units": x.units, "long_name": x.long_name, "values": x.values})).collect::<Vec<_>>(),
            "lines": f.lines().iter().map(|l| json!({"label": l.label, "species": l.species, "family": l.family,
                "wavelength_vac_nm": l.wavelength_vac_nm, "wavelength_air_nm": l.wavelength_air_nm, "log_gf": l.log_gf})).collect::<Vec<_>>(),
            "datasets": f.datasets().iter().map(|d| json!({"name": d.name, "units": d.units, "long_name": d.long_name, "per_line": d.per_line})).collect::<Vec<_>>(),
            "physics_options": serde_json::from_str::<serde_json::Value>(&physics).unwrap_or(serde_json::Value::String(physics.clone())),
            "provenance": provenance,
            "status_counts": status_counts,
        }));
    }
    let mut o = String::new();
    outln!(o, "{}: {}", a.file.display(), f.title());
    outln!(
        o,
        "complete: {} ({} of {} pencils written)",
        if f.is_complete() { "yes" } else { "no" },
        done.iter().filter(|d| **d).count(),
        done.len()
    );
    outln!(o, "axes:");
    for x in f.axes() {
        outln!(
            o,
            "  {:<22} {:<10} {}  ({})",
            x.name,
            x.units,
            fmt_range(&x.values),
            x.long_name
        );
    }
    outln!(o, "lines ({}):", f.lines().len());
    for l in f.lines() {
        outln!(
            o,
            "  {:<16} {:<7} {:>10.4} nm {}",
            l.label,
            l.species,
            l.wavelength_air_nm.unwrap_or(l.wavelength_vac_nm),
            if l.wavelength_air_nm.is_some() {
                "air"
            } else {
                "vac"
            }
        );
    }
    outln!(o, "datasets:");
    for d in f.datasets() {
        outln!(
            o,
            "  {:<22} {:<14} {}{}",
            d.name,
            d.units,
            d.long_name,
            if d.per_line { " [per line]" } else { "" }
        );
    }
    outln!(o, "physics: {physics}");
    for k in [
        "tool",
        "tool_version",
        "created",
        "spec_digest",
        "atomic_data_digest",
    ] {
        outln!(o, "{k}: {}", f.attribute(k).unwrap_or_else(|| "-".into()));
    }
    outln!(o, "status counts:");
    for (c, n) in &counts {
        outln!(
            o,
            "  {:>3} {:<30} {n}",
            c,
            names.get(c).map_or("?", |s| s.as_str())
        );
    }
    emit(&o)
}

#[derive(Args)]
#[command(
    after_help = "Example:\n  linegrid merge --output out/demo.h5 out/demo.shard-000*-of-0004.h5"
)]
pub struct MergeArgs {
    /// The merged grid file to write
    #[arg(long, value_name = "FILE")]
    output: PathBuf,
    /// Shard files (all from one spec, covering every pencil exactly once)
    #[arg(required = true)]
    shards: Vec<PathBuf>,
}

pub fn merge(a: MergeArgs) -> Result<(), Failure> {
    let out = engine::merge(&a.shards, &a.output).map_err(build_failure)?;
    emit(&format!(
        "merged {} shards into {}\n",
        a.shards.len(),
        out.display()
    ))
}

#[derive(Args)]
#[command(
    after_help = "Example:\n  linegrid shards grids/demo.toml --tasks 8 --partition debug --time 00:30:00 --mem 1G\n  then: bash out/demo.submit.sh"
)]
pub struct ShardsArgs {
    /// The grid spec (TOML)
    spec: PathBuf,
    /// Number of array tasks (= shards)
    #[arg(long, value_name = "N")]
    tasks: usize,
    /// Slurm partition
    #[arg(long)]
    partition: Option<String>,
    /// Time limit per task (Slurm format, e.g. 01:00:00)
    #[arg(long)]
    time: Option<String>,
    /// Memory per task (Slurm format, e.g. 2G)
    #[arg(long)]
    mem: Option<String>,
    /// CPUs per task (threads of each shard build)
    #[arg(long, default_value_t = 1)]
    cpus_per_task: usize,
    /// Folder for the scripts (default: next to the grid output)
    #[arg(long, value_name = "DIR")]
    script_dir: Option<PathBuf>,
    /// The linegrid binary the jobs run (default: this one)
    #[arg(long, value_name = "PATH")]
    binary: Option<PathBuf>,
}

fn quote(p: &Path) -> String {
    format!("'{}'", p.display().to_string().replace('\'', "'\\''"))
}

pub fn shards(a: ShardsArgs) -> Result<(), Failure> {
    let plan = load_plan(&a.spec)?;
    if a.tasks == 0 || a.tasks > plan.pencil_count() {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--tasks {}: must be between 1 and the number of pencils ({})",
            a.tasks,
            plan.pencil_count()
        )));
    }
    if a.cpus_per_task == 0 {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--cpus-per-task must be at least 1"
        )));
    }
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let binary = abs(&a
        .binary
        .clone()
        .unwrap_or_else(|| std::env::current_exe().unwrap_or_else(|_| "linegrid".into())));
    let spec = abs(&a.spec);
    let (out, _) = engine::output_paths(&plan, None, None);
    let out = abs(&out);
    let dir = a.script_dir.clone().map_or_else(
        || out.parent().map(Path::to_path_buf).unwrap_or_default(),
        |d| abs(&d),
    );
    std::fs::create_dir_all(&dir).map_err(|e| {
        Failure::bad_input(anyhow::anyhow!(
            "{}: cannot create the script folder: {e}",
            dir.display()
        ))
    })?;
    let stem = out
        .file_stem()
        .map_or("grid".into(), |s| s.to_string_lossy().into_owned());
    let mut head = String::from("#!/bin/bash\n");
    for (k, v) in [
        ("--partition", &a.partition),
        ("--time", &a.time),
        ("--mem", &a.mem),
    ] {
        if let Some(v) = v {
            head.push_str(&format!("#SBATCH {k}={v}\n"));
        }
    }
    let shard_files: Vec<PathBuf> = (0..a.tasks)
        .map(|i| {
            engine::output_paths(
                &plan,
                Some(&out),
                Some(Shard {
                    index: i,
                    count: a.tasks,
                }),
            )
            .0
        })
        .collect();
    let array = format!(
        "{head}#SBATCH --job-name=linegrid-{stem}\n#SBATCH --array=1-{n}\n#SBATCH --cpus-per-task={c}\n#SBATCH --output={log}/{stem}.shard-%a.log\n\
         # One shard of the grid per array task; --resume makes a requeued task continue.\n\
         set -euo pipefail\n\
         exec {bin} build {spec} --output {out} --shard \"${{SLURM_ARRAY_TASK_ID}}/{n}\" --threads {c} --resume\n",
        n = a.tasks,
        c = a.cpus_per_task,
        log = dir.display(),
        bin = quote(&binary),
        spec = quote(&spec),
        out = quote(&out),
    );
    let merge = format!(
        "{head}#SBATCH --job-name=linegrid-{stem}-merge\n#SBATCH --cpus-per-task=1\n#SBATCH --output={log}/{stem}.merge.log\n\
         set -euo pipefail\n\
         exec {bin} merge --output {out} {files}\n",
        log = dir.display(),
        bin = quote(&binary),
        out = quote(&out),
        files = shard_files
            .iter()
            .map(|p| quote(p))
            .collect::<Vec<_>>()
            .join(" "),
    );
    let array_path = dir.join(format!("{stem}.shards.sbatch"));
    let merge_path = dir.join(format!("{stem}.merge.sbatch"));
    let submit_path = dir.join(format!("{stem}.submit.sh"));
    let submit = format!(
        "#!/bin/bash\n# Submit the shard array, then the merge job once every task succeeded.\nset -euo pipefail\n\
         jid=$(sbatch --parsable {a})\n\
         sbatch --parsable --dependency=afterok:${{jid%%;*}} --kill-on-invalid-dep=yes {m}\n",
        a = quote(&array_path),
        m = quote(&merge_path),
    );
    for (p, text) in [
        (&array_path, &array),
        (&merge_path, &merge),
        (&submit_path, &submit),
    ] {
        std::fs::write(p, text)
            .map_err(|e| Failure::bad_input(anyhow::anyhow!("{}: {e}", p.display())))?;
    }
    emit(&format!(
        "wrote {}\n      {}\n      {}\nsubmit with: bash {}\n",
        array_path.display(),
        merge_path.display(),
        submit_path.display(),
        submit_path.display()
    ))
}
