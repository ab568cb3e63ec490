//! Building a grid file from a plan: layout, crash-safe writing to `NAME.partial`, resume,
//! shards, and merging shard files. Progress is reported through a callback (the CLI draws
//! it); nothing here touches the terminal.

use std::path::{Path, PathBuf};

use crate::atoms::AtomicData;

use super::model::{self, Quantity};
use super::plan::{Plan, Shard};
use super::store::{
    AxisMeta, DataKind, DatasetMeta, GridFile, GridWriter, Layout, LineRecord, Pencil, StoreError,
};

/// Errors of a build or merge.
#[derive(Debug, thiserror::Error)]
pub enum BuildError {
    /// The store failed.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The output exists already.
    #[error("{path}: the output file exists already; remove it or choose another --output")]
    OutputExists {
        /// The path.
        path: PathBuf,
    },
    /// A shard set does not fit together.
    #[error("{path}: {message}")]
    Merge {
        /// The shard concerned.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The output folder cannot be created.
    #[error("{path}: cannot create the output folder: {source}")]
    OutputDir {
        /// The folder.
        path: PathBuf,
        /// The error.
        source: std::io::Error,
    },
    /// Renaming the finished file failed.
    #[error("{path}: {source}")]
    Io {
        /// The path.
        path: PathBuf,
        /// The error.
        source: std::io::Error,
    },
}

impl BuildError {
    /// True for problems with the user's input (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        match self {
            BuildError::OutputExists { .. }
            | BuildError::Merge { .. }
            | BuildError::OutputDir { .. } => true,
            BuildError::Store(e) => !matches!(e, StoreError::Hdf5 { .. }),
            BuildError::Io { .. } => false,
        }
    }
}

/// The physics options recorded in provenance (JSON).
pub fn physics_json(plan: &Plan) -> String {
    serde_json::json!({
        "populations": plan.spec.physics.populations,
        "level_cutoff": plan.spec.physics.cutoff,
        "continuum": plan.spec.physics.continuum,
        "view": plan.spec.physics.mu.map_or("flux".to_string(), |m| format!("intensity at mu = {m}")),
        "background": if plan.spec.has_background { "planck" } else { "none" },
        "source_function": if plan.spec.physics.cr_levels.is_some() {
            "hydrogen lines: from the departure coefficients; continuum and other lines: LTE Planck; scattering treated as absorption"
        } else {
            "LTE Planck, scattering treated as absorption"
        },
        "collisional_radiative": plan.spec.physics.cr_levels.map(|n| serde_json::json!({
            "shells": n,
            "case_b": plan.spec.physics.case_b,
            "escape": "slab escape probability (1 - exp(-3 tau))/(3 tau) from the Doppler-core line-centre optical depth",
            "collision_rates": "Vriens & Smeets 1980",
            "metals": "LTE at the LTE electron density",
        })),
        "fixed_parameters": plan.fixed.iter().map(|p| (p.name.clone(), p.values.values()[0])).collect::<std::collections::BTreeMap<_, _>>(),
    })
    .to_string()
}

/// The file layout of a plan.
pub fn layout(plan: &Plan, quantities: &[Quantity]) -> Layout {
    let mut axes: Vec<AxisMeta> = plan
        .axes
        .iter()
        .map(|a| AxisMeta {
            name: a.name.clone(),
            units: a.units().to_string(),
            long_name: a.long_name(),
            values: a.values.values(),
        })
        .collect();
    if axes.is_empty() {
        // A single point still gets one axis, so the file has the same shape conventions.
        let t = plan
            .fixed
            .iter()
            .find(|p| p.name == "temperature")
            .expect("validated: temperature");
        axes.push(AxisMeta {
            name: t.name.clone(),
            units: t.units().into(),
            long_name: t.long_name(),
            values: t.values.values(),
        });
    }
    let mut datasets: Vec<DatasetMeta> = quantities
        .iter()
        .map(|q| DatasetMeta {
            name: q.name.clone(),
            units: q.units.to_string(),
            long_name: q.long_name.clone(),
            per_line: q.per_line,
            kind: DataKind::F64,
        })
        .collect();
    datasets.push(DatasetMeta {
        name: "status".into(),
        units: "1".into(),
        long_name: "point status code (0 = converged)".into(),
        per_line: false,
        kind: DataKind::Status,
    });
    let lines = plan
        .lines
        .iter()
        .map(|l| LineRecord {
            label: l.label.clone(),
            species: l.species.clone(),
            family: l.family.clone(),
            wavelength_vac_nm: l.wavelength_vac * 1e7,
            wavelength_air_nm: l.wavelength_air.map(|w| w * 1e7),
            lower_cm: l.lower_cm,
            upper_cm: l.upper_cm,
            log_gf: l.log_gf,
        })
        .collect();
    let data = AtomicData::embedded();
    Layout {
        title: plan.spec.title.clone(),
        axes,
        lines,
        datasets,
        compression: plan.spec.compression,
        provenance: vec![
            ("spec_text".into(), plan.spec.text.clone()),
            ("spec_digest".into(), plan.spec.digest()),
            (
                "atomic_data_digest".into(),
                format!(
                    "{}+{}",
                    data.digest,
                    crate::atoms::fnv1a_hex(crate::atoms::lines::LINES_TOML)
                ),
            ),
            ("physics_options".into(), physics_json(plan)),
            ("tool_version".into(), env!("CARGO_PKG_VERSION").into()),
        ],
        status_flags: model::status::meanings()
            .into_iter()
            .filter(|(c, _)| *c != 0 && *c != 255)
            .collect(),
    }
}

/// Compute one pencil.
pub fn compute_pencil(plan: &Plan, quantities: &[Quantity], index: usize) -> Pencil {
    let len = plan.pencil_len();
    let n_lines = plan.lines.len();
    let mut data: Vec<Vec<f64>> = quantities
        .iter()
        .map(|q| Vec::with_capacity(len * if q.per_line { n_lines } else { 1 }))
        .collect();
    let mut status = Vec::with_capacity(len);
    for j in 0..len {
        let pv = model::evaluate(plan, quantities, index * len + j);
        for (d, v) in data.iter_mut().zip(pv.values) {
            d.extend(v);
        }
        status.push(pv.status);
    }
    Pencil {
        index,
        data,
        status,
    }
}

/// Where a build writes: the final path and its `.partial` companion.
pub fn output_paths(
    plan: &Plan,
    output: Option<&Path>,
    shard: Option<Shard>,
) -> (PathBuf, PathBuf) {
    let base = output.map_or_else(|| plan.spec.output.clone(), Path::to_path_buf);
    let final_path = match shard {
        None => base,
        Some(s) => {
            let stem = base
                .file_stem()
                .map_or("grid".into(), |s| s.to_string_lossy().into_owned());
            base.with_file_name(format!("{stem}.shard-{:04}-of-{:04}.h5", s.index, s.count))
        }
    };
    let mut partial = final_path.clone().into_os_string();
    partial.push(".partial");
    (final_path, PathBuf::from(partial))
}

/// Options of a build run.
#[derive(Debug, Clone, Default)]
pub struct BuildOptions {
    /// Output path (default: the spec's).
    pub output: Option<PathBuf>,
    /// Continue an interrupted run from its `.partial` file.
    pub resume: bool,
    /// Compute only this shard.
    pub shard: Option<Shard>,
    /// Worker threads (0 = all cores).
    pub threads: usize,
}

/// Summary of a finished build.
#[derive(Debug, Clone, serde::Serialize)]
pub struct BuildReport {
    /// The file written.
    pub path: PathBuf,
    /// Pencils computed in this run.
    pub pencils_computed: usize,
    /// Pencils already present (resume).
    pub pencils_reused: usize,
    /// Points computed in this run.
    pub points_computed: usize,
    /// Whether the file is a complete grid (false for a shard).
    pub complete: bool,
}

/// Build (or resume) a grid file. `progress(points_done, points_total)` is called after each
/// pencil is computed and handed to the writer (which stores them in batches).
pub fn build(
    plan: &Plan,
    opts: &BuildOptions,
    mut progress: impl FnMut(usize, usize),
) -> Result<BuildReport, BuildError> {
    let quantities = model::quantities(plan);
    let (final_path, partial) = output_paths(plan, opts.output.as_deref(), opts.shard);
    if let Some(dir) = final_path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|source| BuildError::OutputDir {
            path: dir.to_path_buf(),
            source,
        })?;
    }
    if final_path.exists() {
        return Err(BuildError::OutputExists { path: final_path });
    }
    let (mut writer, done) = if opts.resume && partial.exists() {
        GridWriter::resume(&partial, &plan.spec.digest())?
    } else {
        if partial.exists() {
            return Err(BuildError::OutputExists { path: partial });
        }
        let w = GridWriter::create(&partial, &layout(plan, &quantities))?;
        let n = w.n_pencils();
        (w, vec![false; n])
    };
    let range = plan.shard_pencils(opts.shard);
    let todo: Vec<usize> = range.clone().filter(|&p| !done[p]).collect();
    let reused = range.len() - todo.len();
    let len = plan.pencil_len();
    let total = todo.len() * len;
    // Pencils are stored in batches (`GridWriter::write_pencils`: a block per run of
    // neighbours, two flushes per batch) of at most a quarter second of work, 256 pencils or
    // 2²¹ values: what a kill can cost a resumed run.
    let mut pending: Vec<Pencil> = Vec::new();
    let mut held = 0usize;
    let mut since = std::time::Instant::now();
    super::run::run(
        &todo,
        opts.threads,
        |p| compute_pencil(plan, &quantities, p),
        |pencil| {
            if pending.is_empty() {
                since = std::time::Instant::now();
            }
            held += pencil.data.iter().map(Vec::len).sum::<usize>();
            pending.push(pencil);
            if held >= 1 << 21
                || pending.len() >= 256
                || since.elapsed() >= std::time::Duration::from_millis(250)
            {
                writer.write_pencils(&pending)?;
                pending.clear();
                held = 0;
            }
            Ok::<(), StoreError>(())
        },
        |n| progress(n * len, total),
    )?;
    writer.write_pencils(&pending)?;
    let complete = opts.shard.is_none_or(|s| s.count == 1);
    if complete {
        writer.finish()?;
    } else {
        drop(writer);
    }
    std::fs::rename(&partial, &final_path).map_err(|source| BuildError::Io {
        path: final_path.clone(),
        source,
    })?;
    Ok(BuildReport {
        path: final_path,
        pencils_computed: todo.len(),
        pencils_reused: reused,
        points_computed: total,
        complete,
    })
}

/// Merge shard files into one complete grid: they must share the spec digest and together
/// cover every pencil exactly once.
pub fn merge(shards: &[PathBuf], output: &Path) -> Result<PathBuf, BuildError> {
    let merr = |path: &Path, message: String| BuildError::Merge {
        path: path.to_path_buf(),
        message,
    };
    if shards.is_empty() {
        return Err(merr(output, "no shard files given".into()));
    }
    if output.exists() {
        return Err(BuildError::OutputExists {
            path: output.to_path_buf(),
        });
    }
    let files: Vec<GridFile> = shards
        .iter()
        .map(|p| GridFile::open(p))
        .collect::<Result<_, _>>()?;
    let digest = files[0].attribute("spec_digest").unwrap_or_default();
    let n = files[0].n_pencils();
    let mut owner: Vec<Option<usize>> = vec![None; n];
    for (i, f) in files.iter().enumerate() {
        let d = f.attribute("spec_digest").unwrap_or_default();
        if d != digest {
            return Err(merr(
                &shards[i],
                format!("comes from a different spec (digest {d}, the first shard has {digest})"),
            ));
        }
        if f.n_pencils() != n {
            return Err(merr(&shards[i], "has a different number of pencils".into()));
        }
        for (p, done) in f.done_pencils()?.into_iter().enumerate() {
            if done {
                if let Some(j) = owner[p] {
                    return Err(merr(
                        &shards[i],
                        format!("overlaps {}: both hold pencil {p}", shards[j].display()),
                    ));
                }
                owner[p] = Some(i);
            }
        }
    }
    let missing: Vec<usize> = owner
        .iter()
        .enumerate()
        .filter(|(_, o)| o.is_none())
        .map(|(p, _)| p)
        .collect();
    if !missing.is_empty() {
        return Err(merr(
            output,
            format!(
                "the shards leave a gap: {} of {n} pencils missing (first: {}); run the missing shard",
                missing.len(),
                missing[0]
            ),
        ));
    }
    let mut partial = output.to_path_buf().into_os_string();
    partial.push(".partial");
    let partial = PathBuf::from(partial);
    if partial.exists() {
        return Err(BuildError::OutputExists { path: partial });
    }
    let layout = files[0].layout(4)?;
    let mut w = GridWriter::create(&partial, &layout)?;
    for (p, o) in owner.iter().enumerate() {
        let f = &files[o.expect("checked: no gaps")];
        w.write_pencil(&f.read_pencil(p)?)?;
    }
    w.finish()?;
    std::fs::rename(&partial, output).map_err(|source| BuildError::Io {
        path: output.to_path_buf(),
        source,
    })?;
    Ok(output.to_path_buf())
}
