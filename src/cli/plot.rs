//! `linegrid plot`: figures as PNG or SVG (thin: gather the data with the library, build the
//! chart with `linegrid::plot::figures`, write the picture and the optional CSV atomically).

use std::path::{Path, PathBuf};

use clap::{Args, Subcommand, ValueEnum};

use linegrid::atoms::AtomicData;
use linegrid::formation::{self, Background, View};
use linegrid::grid::store::DataKind;
use linegrid::interp::Grid;
use linegrid::plot::departure::DepartureTable;
use linegrid::plot::figures::{self, ErrorMap, GrowthInfo, Profile, StrengthSpec};
use linegrid::plot::{self, Format, PlotError};

use super::audit::{AuditSetup, measure};
use super::sample::{interp_failure, read_text};
use super::slab::{GrowthCurveArgs, LineArgs, SlabSetupArgs, slab_failure};
use super::state::PointArgs;
use super::{Failure, emit};

#[derive(Args)]
#[command(
    after_help = "Every kind writes one picture (-o FILE.png or FILE.svg, 800x600 unless --width/--height) and, with --data FILE.csv, the plotted numbers. Nothing is written when the input is bad.\n\nExamples:\n  linegrid plot strength out/demo.h5 --lines \"H-beta,Ca II K,He I 4471\" --by metallicity --fix gas_pressure=1e4 --log-y -o strength.png\n  linegrid plot growth --line \"Ca II K\" --temperature 9500 --gas-pressure 1e4 -o growth.png --data growth.csv\n  linegrid plot profile --line H-alpha --temperature 9500 --gas-pressure 1e4 --hydrogen-column 1e22 --background-temperature 11400 -o halpha.svg\n  linegrid plot audit out/demo.h5 --x temperature --y gas_pressure -o audit.png\n  linegrid plot departure b.csv -o departure.png"
)]
pub struct PlotArgs {
    #[command(subcommand)]
    kind: Kind,
}

#[derive(Subcommand)]
enum Kind {
    /// A per-line grid quantity against an axis (default temperature): one curve per line and per node of --by
    Strength(StrengthArgs),
    /// Curve of growth of one line, with the linear, flat and damping asymptotes and the regimes
    Growth(GrowthPlotArgs),
    /// Normalised flux (or intensity) across one line in a slab, with the continuum level
    Profile(ProfileArgs),
    /// Map of the interpolation error (as `linegrid audit` measures it) over two axes
    Audit(AuditPlotArgs),
    /// Departure coefficients b_n against electron density, from a CSV or JSON table
    Departure(DepartureArgs),
}

/// Where and how big.
#[derive(Args)]
struct OutputArgs {
    /// The picture to write: FILE.png or FILE.svg
    #[arg(short, long, value_name = "FILE")]
    output: PathBuf,
    /// Width, pixels
    #[arg(long, default_value_t = plot::DEFAULT_SIZE.0, value_name = "PX")]
    width: u32,
    /// Height, pixels
    #[arg(long, default_value_t = plot::DEFAULT_SIZE.1, value_name = "PX")]
    height: u32,
    /// Also write the plotted data to this CSV file
    #[arg(long, value_name = "FILE")]
    data: Option<PathBuf>,
    /// Title (default: one chosen for the kind)
    #[arg(long)]
    title: Option<String>,
}

fn plot_failure(e: PlotError) -> Failure {
    if e.is_bad_input() {
        Failure::bad_input(e)
    } else {
        Failure::failed(e)
    }
}

impl OutputArgs {
    /// Check the output paths before any work: a known picture format, existing directories,
    /// two different files.
    fn check(&self) -> Result<Format, Failure> {
        let format = Format::from_path(&self.output).ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "--output {}: the file name must end in .png or .svg",
                self.output.display()
            ))
        })?;
        for (opt, p) in [
            ("--output", Some(&self.output)),
            ("--data", self.data.as_ref()),
        ] {
            let Some(p) = p else { continue };
            let dir = parent(p);
            if !dir.is_dir() {
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "{opt} {}: directory {} does not exist",
                    p.display(),
                    dir.display()
                )));
            }
            if p.is_dir() {
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "{opt} {}: is a directory",
                    p.display()
                )));
            }
        }
        if self.data.as_deref() == Some(self.output.as_path()) {
            return Err(Failure::bad_input(anyhow::anyhow!(
                "--data and --output name the same file"
            )));
        }
        let ok = |v: u32| (plot::SIZE_RANGE.0..=plot::SIZE_RANGE.1).contains(&v);
        if !ok(self.width) || !ok(self.height) {
            return Err(plot_failure(PlotError::Size {
                width: self.width,
                height: self.height,
            }));
        }
        Ok(format)
    }

    /// Write the picture and the CSV: each to a temporary file beside its target, then
    /// renamed; on any failure nothing of ours is left.
    fn write(&self, picture: &[u8], csv: &str) -> Result<(), Failure> {
        let mut files: Vec<(&Path, &[u8])> = vec![(&self.output, picture)];
        if let Some(d) = &self.data {
            files.push((d, csv.as_bytes()));
        }
        let tmp = |p: &Path| {
            let name = p
                .file_name()
                .map_or_else(|| "plot".to_string(), |n| n.to_string_lossy().into_owned());
            parent(p).join(format!(".{name}.{}.tmp", std::process::id()))
        };
        let mut written: Vec<PathBuf> = Vec::new();
        let cleanup = |w: &[PathBuf]| {
            for p in w {
                let _ = std::fs::remove_file(p);
            }
        };
        for (p, bytes) in &files {
            let t = tmp(p);
            if let Err(e) = std::fs::write(&t, bytes) {
                cleanup(&written);
                let _ = std::fs::remove_file(&t);
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "{}: cannot write: {e}",
                    p.display()
                )));
            }
            written.push(t);
        }
        let mut renamed: Vec<&Path> = Vec::new();
        for ((p, _), t) in files.iter().zip(&written) {
            if let Err(e) = std::fs::rename(t, p) {
                cleanup(&written);
                for r in &renamed {
                    let _ = std::fs::remove_file(r);
                }
                return Err(Failure::failed(anyhow::anyhow!(
                    "{}: cannot write: {e}",
                    p.display()
                )));
            }
            renamed.push(p);
        }
        let mut o = format!(
            "wrote {} ({}×{})",
            self.output.display(),
            self.width,
            self.height
        );
        if let Some(d) = &self.data {
            o.push_str(&format!(" and {}", d.display()));
        }
        o.push('\n');
        emit(&o)
    }

    fn chart(&self, format: Format, mut chart: plot::LineChart, csv: &str) -> Result<(), Failure> {
        if let Some(t) = &self.title {
            chart.title = t.clone();
        }
        let bytes =
            plot::render_chart(&chart, format, self.width, self.height).map_err(plot_failure)?;
        self.write(&bytes, csv)
    }
}

fn parent(p: &Path) -> PathBuf {
    match p.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

pub fn run(a: PlotArgs) -> Result<(), Failure> {
    match a.kind {
        Kind::Strength(a) => strength(a),
        Kind::Growth(a) => growth(a),
        Kind::Profile(a) => profile(a),
        Kind::Audit(a) => audit(a),
        Kind::Departure(a) => departure(a),
    }
}

// ---------------------------------------------------------------------------------------------

/// Scale of the x axis.
#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
enum Scale {
    /// Logarithmic when the axis is positive and spans more than a factor 4
    Auto,
    /// Linear
    Linear,
    /// Logarithmic
    Log,
}

#[derive(Args)]
struct StrengthArgs {
    /// The grid file (from `linegrid build`)
    grid: PathBuf,
    /// Lines to draw, comma-separated labels (see `linegrid describe`)
    #[arg(long, value_delimiter = ',', required = true, value_name = "LABELS")]
    lines: Vec<String>,
    /// Per-line dataset (default: equivalent_width)
    #[arg(long)]
    dataset: Option<String>,
    /// Horizontal axis
    #[arg(long, default_value = "temperature", value_name = "AXIS")]
    x: String,
    /// One curve per node of this axis (e.g. metallicity, gas_pressure)
    #[arg(long, value_name = "AXIS")]
    by: Option<String>,
    /// Hold an axis at one of its nodes, AXIS=VALUE (repeatable; default: the middle node)
    #[arg(long, value_name = "AXIS=VALUE", allow_negative_numbers = true)]
    fix: Vec<String>,
    /// Logarithmic y axis
    #[arg(long)]
    log_y: bool,
    /// Scale of the x axis
    #[arg(long, value_enum, default_value = "auto")]
    x_scale: Scale,
    #[command(flatten)]
    out: OutputArgs,
}

fn parse_fix(f: &str) -> Result<(String, f64), Failure> {
    let (k, v) = f
        .split_once('=')
        .ok_or_else(|| Failure::bad_input(anyhow::anyhow!("--fix '{f}': expected AXIS=VALUE")))?;
    let x: f64 = v.trim().parse().map_err(|_| {
        Failure::bad_input(anyhow::anyhow!(
            "--fix '{f}': '{}' is not a number",
            v.trim()
        ))
    })?;
    Ok((k.trim().to_string(), x))
}

fn strength(a: StrengthArgs) -> Result<(), Failure> {
    let format = a.out.check()?;
    let grid = Grid::open(&a.grid).map_err(interp_failure)?;
    let dataset = match &a.dataset {
        Some(d) => d.clone(),
        None => grid.default_dataset().ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "{}: the grid has no per-line dataset",
                a.grid.display()
            ))
        })?,
    };
    let meta = grid
        .datasets()
        .iter()
        .find(|d| d.name == dataset)
        .cloned()
        .ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "{}: no dataset '{dataset}' (the grid has: {})",
                a.grid.display(),
                grid.file().dataset_names().join(", ")
            ))
        })?;
    if !meta.per_line || meta.kind != DataKind::F64 {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "{}: dataset '{dataset}' is not a per-line quantity",
            a.grid.display()
        )));
    }
    let mut lines = Vec::new();
    for l in &a.lines {
        let k = grid.line_index(l.trim()).map_err(interp_failure)?;
        lines.push((k, l.trim().to_string()));
    }
    let fixes = a
        .fix
        .iter()
        .map(|f| parse_fix(f))
        .collect::<Result<Vec<_>, _>>()?;
    let (x_axis, by_axis, fixed) =
        figures::resolve_nodes(grid.axes(), &a.x, a.by.as_deref(), &fixes).map_err(plot_failure)?;
    let xa = &grid.axes()[x_axis];
    let (lo, hi) = xa
        .values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
            (l.min(*v), h.max(*v))
        });
    let log_x = match a.x_scale {
        Scale::Linear => false,
        Scale::Log => {
            if lo <= 0.0 {
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "--x-scale log: axis '{}' has non-positive nodes",
                    xa.name
                )));
            }
            true
        }
        Scale::Auto => lo > 0.0 && hi / lo > 4.0,
    };
    let spec = StrengthSpec {
        axes: grid.axes().to_vec(),
        dataset: meta,
        x_axis,
        by_axis,
        fixed,
        lines,
        log_x,
        log_y: a.log_y,
    };
    let data = grid.read(&dataset).map_err(interp_failure)?;
    let status = grid.status().map_err(interp_failure)?;
    let curves = figures::strength_curves(&spec, &data, &status);
    let title = format!(
        "{} against {}",
        capitalise(&spec.dataset.long_name),
        xa.long_name
    );
    let chart = figures::strength_chart(&spec, &curves, &title);
    a.out
        .chart(format, chart, &figures::strength_csv(&spec, &curves))
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

// ---------------------------------------------------------------------------------------------

#[derive(Args)]
struct GrowthPlotArgs {
    #[command(flatten)]
    curve: GrowthCurveArgs,
    #[command(flatten)]
    out: OutputArgs,
}

fn growth(a: GrowthPlotArgs) -> Result<(), Failure> {
    let format = a.out.check()?;
    let c = a.curve.compute()?;
    let info = GrowthInfo {
        label: c.line.label.clone(),
        wavelength_angstrom: c.line.wavelength() * 1e8,
        doppler_width_angstrom: c.doppler_cm * 1e8,
        damping_parameter: c.absorption.damping_parameter(),
        gas: format!(
            "T = {} K, n_e = {} cm⁻³",
            plot_number(c.temperature),
            plot_number(c.electron_density)
        ),
    };
    let chart = figures::growth_chart(&info, &c.points);
    a.out.chart(format, chart, &figures::growth_csv(&c.points))
}

/// Three significant figures, as tick labels write them.
fn plot_number(v: f64) -> String {
    let s = format!("{v:.2e}");
    let Some((m, e)) = s.split_once('e') else {
        return s;
    };
    let e: i32 = e.parse().unwrap_or(0);
    if (-2..5).contains(&e) {
        let digits = (2 - e).max(0) as usize;
        format!("{v:.digits$}")
    } else {
        let sup: String = e
            .to_string()
            .chars()
            .map(|c| match c {
                '-' => '⁻',
                d => ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹']
                    [d.to_digit(10).unwrap_or(0) as usize],
            })
            .collect();
        format!("{m}×10{sup}")
    }
}

// ---------------------------------------------------------------------------------------------

#[derive(Args)]
struct ProfileArgs {
    /// The line (label; see `linegrid lines`)
    #[arg(long, value_name = "LABEL")]
    line: String,
    #[command(flatten)]
    point: PointArgs,
    #[command(flatten)]
    setup: SlabSetupArgs,
    /// Half-width of the window around the line centre, Å (default: from the line's FWHM
    /// and equivalent width)
    #[arg(long, allow_negative_numbers = true, value_name = "ANGSTROM")]
    span: Option<f64>,
    /// Number of wavelengths (odd counts include the line centre), 3 to 100000
    #[arg(long, default_value_t = 801, value_name = "N")]
    samples: usize,
    /// Extra lines from a CSV file
    #[arg(long, value_name = "FILE")]
    line_list: Option<PathBuf>,
    #[command(flatten)]
    out: OutputArgs,
}

fn profile(a: ProfileArgs) -> Result<(), Failure> {
    let format = a.out.check()?;
    if !(3..=100_000).contains(&a.samples) {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--samples {}: must be between 3 and 100000",
            a.samples
        )));
    }
    if let Some(s) = a.span
        && !(s.is_finite() && s > 0.0)
    {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--span {s}: must be a positive number of Å"
        )));
    }
    let opts = a.setup.options()?;
    let line = LineArgs::one(&a.line, a.line_list.clone())?;
    let (_, state) = a.point.solve(20)?;
    let data = AtomicData::embedded();
    let st = formation::line_strength(data, &state, &opts, &line).map_err(slab_failure)?;
    let span = match a.span {
        Some(s) => s,
        None => {
            let w = st.equivalent_width.unwrap_or(0.0).abs();
            (8.0 * st.fwhm_angstrom)
                .max(4.0 * w)
                .max(20.0 * st.widths.doppler_cm * 1e8)
        }
    };
    let n = a.samples;
    let offsets_a: Vec<f64> = (0..n)
        .map(|i| -span + 2.0 * span * i as f64 / (n - 1) as f64)
        .collect();
    let offsets_cm: Vec<f64> = offsets_a.iter().map(|d| d * 1e-8).collect();
    let samples =
        formation::line_profile(data, &state, &opts, &line, &offsets_cm).map_err(slab_failure)?;
    let intensity = matches!(opts.view, View::Intensity(_));
    let mut note = vec![
        format!(
            "T = {} K, n_e = {} cm⁻³",
            plot_number(state.temperature),
            plot_number(state.electron_density)
        ),
        format!("slab L = {} cm", plot_number(opts.thickness(&state))),
        match opts.background {
            Background::Planck(t) => format!("background {} K", plot_number(t)),
            Background::None => "no background".into(),
        },
    ];
    match (st.equivalent_width, st.emission) {
        (Some(w), _) => note.push(format!("W_λ = {} mÅ", plot_number(w * 1e3))),
        (_, Some(e)) => note.push(format!("emission {} cgs", plot_number(e))),
        _ => {}
    }
    let p = Profile {
        label: line.label.clone(),
        centre_angstrom: line.wavelength() * 1e8,
        air: line.wavelength_vac > 200e-7,
        offset_angstrom: offsets_a,
        normalised: samples.iter().map(|s| s.1).collect(),
        intensity,
        note,
    };
    a.out.chart(
        format,
        figures::profile_chart(&p),
        &figures::profile_csv(&p),
    )
}

// ---------------------------------------------------------------------------------------------

/// Interpolation scheme of the map.
#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
enum SchemeArg {
    /// Multilinear
    Linear,
    /// Cubic Hermite (Catmull-Rom)
    Cubic,
}

#[derive(Args)]
struct AuditPlotArgs {
    #[command(flatten)]
    setup: AuditSetup,
    /// Horizontal axis (default: the first axis)
    #[arg(long, value_name = "AXIS")]
    x: Option<String>,
    /// Vertical axis (default: the next axis)
    #[arg(long, value_name = "AXIS")]
    y: Option<String>,
    /// Only this line (default: the worst line in each cell)
    #[arg(long, value_name = "LABEL")]
    line: Option<String>,
    /// Interpolation scheme mapped
    #[arg(long, value_enum, default_value = "linear")]
    scheme: SchemeArg,
    #[command(flatten)]
    out: OutputArgs,
}

fn audit(a: AuditPlotArgs) -> Result<(), Failure> {
    let format = a.out.check()?;
    // Check the axis and line names before the (slower) audit.
    let grid = Grid::open(&a.setup.grid).map_err(interp_failure)?;
    let names = grid.axis_names();
    if names.len() < 2 {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "{}: the map needs a grid of at least two axes",
            a.setup.grid.display()
        )));
    }
    let xi = match &a.x {
        Some(x) => grid.axis_index(x).map_err(interp_failure)?,
        None => 0,
    };
    let yi = match &a.y {
        Some(y) => grid.axis_index(y).map_err(interp_failure)?,
        None => usize::from(xi == 0),
    };
    if xi == yi {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--x and --y both name axis '{}'",
            names[xi]
        )));
    }
    let line = match &a.line {
        Some(l) => Some(grid.line_index(l).map_err(interp_failure)?),
        None => None,
    };
    drop(grid);
    let audit = measure(&a.setup)?;
    let axes = audit.grid.axes();
    let (nx, ny) = (audit.cell_shape[xi], audit.cell_shape[yi]);
    let method = usize::from(a.scheme == SchemeArg::Cubic);
    let mut errors: Vec<Option<f64>> = vec![None; nx * ny];
    let mut worst: Vec<Option<String>> = vec![None; nx * ny];
    let mut tested = vec![0usize; nx * ny];
    for &c in &audit.cells {
        let idx = audit.unravel(c);
        tested[idx[yi] * nx + idx[xi]] += 1;
    }
    for r in &audit.records {
        if r.axis.is_some() || r.method != method || line.is_some_and(|l| l != r.line) {
            continue;
        }
        let idx = audit.unravel(r.cell);
        let k = idx[yi] * nx + idx[xi];
        if errors[k].is_none_or(|e| r.error > e) {
            errors[k] = Some(r.error);
            worst[k] = Some(audit.lines[r.line].clone());
        }
    }
    let scheme = if method == 0 { "multilinear" } else { "cubic" };
    let what = format!(
        "{} of {}, {scheme}",
        audit.dataset,
        line.map_or("all lines".to_string(), |l| audit.lines[l].clone())
    );
    let others: Vec<String> = names
        .iter()
        .enumerate()
        .filter(|(d, _)| *d != xi && *d != yi)
        .map(|(_, n)| figures::axis_symbol(n))
        .collect();
    let mut note = vec![
        "at cell centres".to_string(),
        format!(
            "{} of {} cells{}",
            audit.cells.len(),
            audit.cell_shape.iter().product::<usize>(),
            if audit.sampled { " (sample)" } else { "" }
        ),
    ];
    if !others.is_empty() {
        note.push(format!("worst over {}", others.join(", ")));
    }
    if audit.log_value {
        note.push("value interpolated in log10".into());
    }
    let map = ErrorMap {
        x: axes[xi].clone(),
        y: axes[yi].clone(),
        errors,
        worst_line: worst,
        tested,
        what,
        note,
    };
    let mut heat = figures::audit_map(&map);
    if let Some(t) = &a.out.title {
        heat.title = t.clone();
    }
    let bytes =
        plot::render_heatmap(&heat, format, a.out.width, a.out.height).map_err(plot_failure)?;
    a.out.write(&bytes, &figures::audit_csv(&map))
}

// ---------------------------------------------------------------------------------------------

#[derive(Args)]
#[command(
    after_help = "TABLE is CSV (header n_e,b_1,b_2,...,b_N; n_e in cm^-3; one row per electron density; '#' comments) or JSON ({\"n_e\": [...], \"levels\": [1, 2, ...], \"b\": [[b_1, b_2, ...], ...]}), chosen by the .json extension.\n\nWithout TABLE the collisional-radiative model is solved on a sweep of pure-hydrogen gas at one temperature, from --min-electron-density to --max-electron-density (LTE electron densities that fix each point; the curves are drawn against the model's own n_e), e.g.\n  linegrid plot departure --temperature 10000 --min-electron-density 1e8 --max-electron-density 1e18 --show 1,2,3,5,10 -o b.png"
)]
struct DepartureArgs {
    /// The table of departure coefficients (CSV, or JSON when the name ends in .json)
    table: Option<PathBuf>,
    /// Sweep: gas temperature, K
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "K",
        required_unless_present = "table"
    )]
    temperature: Option<f64>,
    /// Sweep: lowest LTE electron density, cm^-3
    #[arg(
        long,
        default_value_t = 1e8,
        allow_negative_numbers = true,
        value_name = "CM-3"
    )]
    min_electron_density: f64,
    /// Sweep: highest LTE electron density, cm^-3
    #[arg(
        long,
        default_value_t = 1e18,
        allow_negative_numbers = true,
        value_name = "CM-3"
    )]
    max_electron_density: f64,
    /// Sweep: number of densities (log-spaced)
    #[arg(long, default_value_t = 31, value_name = "N")]
    steps: usize,
    /// Sweep: line escape from a slab of this thickness, cm (default: optically thin lines)
    #[arg(long, allow_negative_numbers = true, value_name = "CM")]
    thickness: Option<f64>,
    /// Shells to draw, comma-separated (default: all)
    #[arg(long, value_delimiter = ',', value_name = "LIST")]
    show: Option<Vec<u32>>,
    #[command(flatten)]
    populations: super::populations::PopulationArgs,
    #[command(flatten)]
    out: OutputArgs,
}

/// Solve the collisional-radiative model along a sweep of LTE electron densities.
fn departure_sweep(a: &DepartureArgs, t: f64) -> Result<(DepartureTable, String), Failure> {
    use linegrid::eos::{self, Composition, Density, EosOptions, StateRequest};
    use linegrid::formation::departures::solve_with_escape;
    use linegrid::nlte::Escape;
    let bad = |m: String| Failure::bad_input(anyhow::anyhow!(m));
    let (lo, hi) = (a.min_electron_density, a.max_electron_density);
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo) {
        return Err(bad(format!(
            "--min-electron-density {lo} and --max-electron-density {hi}: need 0 < min < max"
        )));
    }
    if !(2..=1000).contains(&a.steps) {
        return Err(bad(format!(
            "--steps {}: must be between 2 and 1000",
            a.steps
        )));
    }
    if let Some(l) = a.thickness
        && !(l.is_finite() && l > 0.0)
    {
        return Err(bad(format!(
            "--thickness {l}: must be a finite positive number"
        )));
    }
    let mut cr = a.populations.settings()?.unwrap_or_default();
    if a.populations.populations == super::populations::PopulationsChoice::Lte {
        cr = linegrid::formation::departures::CrSettings {
            levels: a.populations.cr_levels,
            ..cr
        };
    }
    let data = linegrid::atoms::AtomicData::embedded();
    let mut table = DepartureTable {
        electron_density: Vec::new(),
        levels: (1..=cr.levels).collect(),
        b: Vec::new(),
    };
    for k in 0..a.steps {
        let ne = lo * (hi / lo).powf(k as f64 / (a.steps - 1) as f64);
        let req = StateRequest {
            temperature: t,
            density: Density::ElectronDensity(ne),
            composition: Composition {
                elements: Some(vec!["H".into()]),
                ..Composition::default()
            },
            options: EosOptions::default(),
        };
        let state = eos::solve_with(data, &req).map_err(|e| match e {
            eos::StateError::Input(e) => Failure::bad_input(e),
            eos::StateError::NotConverged(nc) => Failure::failed(nc),
        })?;
        let escape = match a.thickness {
            None => Escape::Thin,
            Some(l) => Escape::Slab {
                thickness: l,
                microturbulence: 2e5,
            },
        };
        let sol =
            solve_with_escape(data, &state, &cr, escape).map_err(super::populations::cr_failure)?;
        table.electron_density.push(sol.electron_density);
        table.b.push(sol.departures());
    }
    let escape = a
        .thickness
        .map_or("thin lines".to_string(), |l| format!("L = {l:e} cm"));
    Ok((
        table,
        format!(
            "H, {t} K, N = {}, W = {}, {escape}{}",
            cr.levels,
            cr.field.dilution,
            if cr.case_b { ", case B" } else { "" }
        ),
    ))
}

fn departure(a: DepartureArgs) -> Result<(), Failure> {
    let format = a.out.check()?;
    let (mut table, note) = match (&a.table, a.temperature) {
        (Some(path), _) => {
            let text = read_text(path)?;
            let name = path.display().to_string();
            let is_json = path
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("json"));
            let table = if is_json {
                DepartureTable::from_json(&text, &name)
            } else {
                DepartureTable::from_csv(&text, &name)
            }
            .map_err(Failure::bad_input)?;
            (table, format!("from {}", path.display()))
        }
        (None, Some(t)) => departure_sweep(&a, t)?,
        (None, None) => unreachable!("clap requires a table or a temperature"),
    };
    if let Some(show) = &a.show {
        for n in show {
            if !table.levels.contains(n) {
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "--show {n}: the table has shells {}..{}",
                    table.levels.first().copied().unwrap_or(0),
                    table.levels.last().copied().unwrap_or(0)
                )));
            }
        }
        let keep: Vec<usize> = (0..table.levels.len())
            .filter(|&k| show.contains(&table.levels[k]))
            .collect();
        table.levels = keep.iter().map(|&k| table.levels[k]).collect();
        table.b = table
            .b
            .iter()
            .map(|row| keep.iter().map(|&k| row[k]).collect())
            .collect();
    }
    let chart = figures::departure_chart(
        &table,
        "Departure coefficients of hydrogen levels",
        vec![note],
    );
    a.out.chart(format, chart, &figures::departure_csv(&table))
}
