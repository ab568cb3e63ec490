//! `linegrid slab` (one slab: state, continuum, line strengths) and `linegrid growth`
//! (curve of growth of one line).

use clap::{ArgGroup, Args};
use serde_json::json;

use linegrid::atoms::AtomicData;
use linegrid::atoms::lines::{Catalogue, Line, Selection, read_csv};
use linegrid::formation::growth::{GrowthPoint, line_curve_of_growth};
use linegrid::formation::{self, Background, Geometry, SlabError, SlabOptions, View};
use linegrid::transfer::growth::AbsorptionLine;

use super::state::PointArgs;
use super::{Failure, emit, print_json};

/// Which lines to compute.
#[derive(Args, Clone)]
pub struct LineArgs {
    /// Line labels, comma-separated (e.g. "H-alpha,Ca II K,Na I D2"); see `linegrid lines`
    #[arg(long, value_delimiter = ',', value_name = "LABELS")]
    pub lines: Vec<String>,
    /// Only lines of these species (e.g. "Ca II")
    #[arg(long, value_delimiter = ',', value_name = "NAMES")]
    pub species: Vec<String>,
    /// Only lines of these families or series (e.g. Balmer, "Na D")
    #[arg(long, value_delimiter = ',', value_name = "NAMES")]
    pub family: Vec<String>,
    /// Shortest customary wavelength, nm
    #[arg(long, value_name = "NM")]
    pub min_wavelength: Option<f64>,
    /// Longest customary wavelength, nm
    #[arg(long, value_name = "NM")]
    pub max_wavelength: Option<f64>,
    /// Extra lines from a CSV file (columns: see README)
    #[arg(long, value_name = "FILE")]
    pub line_list: Option<std::path::PathBuf>,
}

impl LineArgs {
    /// The one line `label` (from the catalogue plus an optional user file).
    pub fn one(label: &str, line_list: Option<std::path::PathBuf>) -> Result<Line, Failure> {
        let la = LineArgs {
            lines: vec![label.to_string()],
            species: vec![],
            family: vec![],
            min_wavelength: None,
            max_wavelength: None,
            line_list,
        };
        let cat = la.catalogue()?;
        Ok(la.select(&cat)?.remove(0))
    }

    /// The catalogue (built-in plus the user's file).
    pub fn catalogue(&self) -> Result<Catalogue, Failure> {
        let mut cat = Catalogue::embedded().clone();
        if let Some(p) = &self.line_list {
            let text = std::fs::read_to_string(p).map_err(|e| {
                Failure::bad_input(anyhow::anyhow!("--line-list {}: {e}", p.display()))
            })?;
            let more = read_csv(AtomicData::embedded(), &text, &p.display().to_string())
                .map_err(Failure::bad_input)?;
            cat.extend(more, &p.display().to_string())
                .map_err(Failure::bad_input)?;
        }
        Ok(cat)
    }

    /// The selected lines.
    pub fn select(&self, cat: &Catalogue) -> Result<Vec<Line>, Failure> {
        let mut out = Vec::new();
        for l in &self.lines {
            let line = cat.get(l).ok_or_else(|| {
                Failure::bad_input(anyhow::anyhow!(
                    "--lines: unknown line label '{l}' (list them with `linegrid lines`)"
                ))
            })?;
            out.push(line.clone());
        }
        let filtered = !self.species.is_empty()
            || !self.family.is_empty()
            || self.min_wavelength.is_some()
            || self.max_wavelength.is_some();
        if filtered || self.lines.is_empty() {
            for (name, v) in [
                ("--min-wavelength", self.min_wavelength),
                ("--max-wavelength", self.max_wavelength),
            ] {
                if let Some(v) = v
                    && !(v.is_finite() && v > 0.0)
                {
                    return Err(Failure::bad_input(anyhow::anyhow!(
                        "invalid {name} = {v}: must be a positive number of nm"
                    )));
                }
            }
            let sel = Selection {
                species: self.species.clone(),
                families: self.family.clone(),
                min_wavelength: self.min_wavelength.map(|v| v * 1e-7),
                max_wavelength: self.max_wavelength.map(|v| v * 1e-7),
            };
            let picked = cat.select(&sel);
            if filtered && picked.is_empty() {
                return Err(Failure::bad_input(anyhow::anyhow!(
                    "no catalogue line matches the selection (--species/--family/--min-wavelength/--max-wavelength)"
                )));
            }
            out.extend(picked.into_iter().cloned());
        }
        Ok(out)
    }
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid slab --temperature 9500 --gas-pressure 1e4 --thickness 1e7 --background-temperature 11400 --family Balmer --max-wavelength 700\n  linegrid slab --temperature 5800 --gas-pressure 1e5 --hydrogen-column 1e23 --background-temperature 7000 --lines \"Ca II K,Na I D2,H-alpha\" --json\n  linegrid slab --temperature 10000 --electron-density 1e13 --thickness 1 --no-background --lines H-alpha,H-beta"
)]
pub struct SlabArgs {
    #[command(flatten)]
    point: PointArgs,
    #[command(flatten)]
    setup: SlabSetupArgs,
    #[command(flatten)]
    lines: LineArgs,
    #[command(flatten)]
    populations: super::populations::PopulationArgs,
    /// Print JSON
    #[arg(long)]
    json: bool,
}

/// The slab around the gas: size, background, microturbulence, view, continuum (shared with
/// `linegrid plot profile`).
#[derive(Args)]
#[command(
    group(ArgGroup::new("size").required(true).args(["thickness", "hydrogen_column"])),
    group(ArgGroup::new("behind").required(true).args(["background_temperature", "no_background"])),
)]
pub struct SlabSetupArgs {
    /// Slab thickness, cm
    #[arg(long, allow_negative_numbers = true, value_name = "CM")]
    thickness: Option<f64>,
    /// Column of hydrogen nuclei through the slab, cm^-2
    #[arg(long, allow_negative_numbers = true, value_name = "CM-2")]
    hydrogen_column: Option<f64>,
    /// Planck background behind the slab, K
    #[arg(long, allow_negative_numbers = true, value_name = "K")]
    background_temperature: Option<f64>,
    /// No background: the slab is seen in emission
    #[arg(long)]
    no_background: bool,
    /// Microturbulent velocity, km/s
    #[arg(
        long,
        default_value_t = 2.0,
        allow_negative_numbers = true,
        value_name = "KM/S"
    )]
    microturbulence: f64,
    /// Measure in intensity at this direction cosine (0 < mu <= 1) instead of flux
    #[arg(long, allow_negative_numbers = true, value_name = "MU")]
    mu: Option<f64>,
    /// Leave out the continuum opacity
    #[arg(long)]
    no_continuum: bool,
}

impl SlabSetupArgs {
    /// The validated slab options.
    pub fn options(&self) -> Result<SlabOptions, Failure> {
        let opts = SlabOptions {
            geometry: match (self.thickness, self.hydrogen_column) {
                (Some(l), _) => Geometry::Thickness(l),
                (_, Some(n)) => Geometry::HydrogenColumn(n),
                _ => unreachable!("clap requires one"),
            },
            background: match self.background_temperature {
                Some(t) => Background::Planck(t),
                None => Background::None,
            },
            microturbulence: self.microturbulence * 1e5,
            view: self.mu.map_or(View::Flux, View::Intensity),
            continuum: !self.no_continuum,
            damping: None,
        };
        opts.validate().map_err(slab_failure)?;
        Ok(opts)
    }
}

pub fn slab_failure(e: SlabError) -> Failure {
    Failure::bad_input(e)
}

pub fn slab(a: SlabArgs) -> Result<(), Failure> {
    let opts = a.setup.options()?;
    let cat = a.lines.catalogue()?;
    let lines = a.lines.select(&cat)?;
    let (req, state) = a.point.solve(20)?;
    let data = AtomicData::embedded();
    // Only lines of species present, unless the user named them.
    let named: Vec<&Line> = lines.iter().collect();
    let present: Vec<&Line> = if a.lines.lines.is_empty() {
        named
            .into_iter()
            .filter(|l| {
                l.species_index
                    .is_some_and(|k| state.abundances[data.species[k].element] > 0.0)
            })
            .collect()
    } else {
        named
    };
    let cr = a.populations.settings()?;
    let cr_solution = match &cr {
        None => None,
        Some(c) => Some(
            formation::departures::solve_departures(data, &state, &opts, c)
                .map_err(super::populations::cr_failure)?,
        ),
    };
    let strengths = formation::departures::line_strengths_with(
        data,
        &state,
        &opts,
        &present,
        cr_solution.as_ref(),
    )
    .map_err(slab_failure)?;
    let escape = format!("this slab ({:e} cm)", opts.thickness(&state));
    let gas = formation::continuum_gas(data, &state);
    if a.json {
        let mut state_v = super::state::state_json(data, &req, &state);
        if let Some(o) = state_v.as_object_mut() {
            o.remove("hydrogen_levels");
        }
        let conts: Vec<_> = present
            .iter()
            .map(|l| {
                let c = linegrid::opacity::continuum::continuum(l.wavelength_vac, &gas);
                json!({"label": l.label, "h_minus_bf": c.h_minus_bf, "h_minus_ff": c.h_minus_ff, "h_bf": c.h_bf,
                       "ion_ff": c.ion_ff, "thomson": c.thomson, "rayleigh": c.rayleigh, "total": c.total()})
            })
            .collect();
        let mut v = json!({
            "state": state_v,
            "slab": {"thickness_cm": opts.thickness(&state), "options": opts},
            "continuum_opacity_cm-1": conts,
            "lines": strengths,
            "mean_evaluations_per_line": mean_evals(&strengths),
        });
        if let (Some(c), Some(sol)) = (&cr, &cr_solution) {
            v["collisional_radiative"] = super::populations::cr_json(c, &escape, sol);
        }
        return print_json(&v);
    }
    let mut o = String::new();
    outln!(
        o,
        "Slab: T = {:.0} K, n_e = {:.3e} cm^-3, n_H = {:.3e} cm^-3, L = {:.3e} cm, background {}",
        state.temperature,
        state.electron_density,
        state.hydrogen_density,
        opts.thickness(&state),
        match opts.background {
            Background::Planck(t) => format!("Planck {t:.0} K"),
            Background::None => "none (emission)".into(),
        }
    );
    let emission = matches!(opts.background, Background::None);
    outln!(
        o,
        "{:<16} {:>11} {:>10} {:>10} {:>10} {:>13} {:>9} {:>9} {:>8}",
        "line",
        "lambda/A",
        "logN_l",
        "tau0",
        "tau_cont",
        if emission { "emission" } else { "W/mA" },
        if emission { "peak" } else { "depth" },
        "FWHM/A",
        "a"
    );
    for s in &strengths {
        let strength = match (s.equivalent_width, s.emission) {
            (Some(w), _) => format!("{:.4}", w * 1e3),
            (_, Some(e)) => format!("{e:.4e}"),
            _ => "-".into(),
        };
        outln!(
            o,
            "{:<16} {:>11.3} {:>10.3} {:>10.3e} {:>10.3e} {:>13} {:>9.4} {:>9.4} {:>8.2e}",
            s.label,
            s.wavelength_angstrom,
            s.lower_column.max(1e-300).log10(),
            s.tau0,
            s.continuum_tau,
            strength,
            s.central_depth,
            s.fwhm_angstrom,
            s.damping
        );
    }
    outln!(
        o,
        "mean profile evaluations per line: {:.1}",
        mean_evals(&strengths)
    );
    for s in strengths.iter().filter(|s| !s.converged) {
        outln!(
            o,
            "warning: the integral of '{}' stopped at its evaluation budget short of its tolerance",
            s.label
        );
    }
    if let (Some(c), Some(sol)) = (&cr, &cr_solution) {
        outln!(o);
        o.push_str(&super::populations::cr_text(c, &escape, sol));
    }
    emit(&o)
}

fn mean_evals(s: &[formation::LineStrength]) -> f64 {
    if s.is_empty() {
        0.0
    } else {
        s.iter().map(|x| x.evaluations as f64).sum::<f64>() / s.len() as f64
    }
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid growth --line \"Na I D2\" --temperature 5800 --gas-pressure 1e5\n  linegrid growth --line H-alpha --temperature 9000 --electron-density 1e13 --min-log-column 10 --max-log-column 20 --json"
)]
pub struct GrowthArgs {
    #[command(flatten)]
    curve: GrowthCurveArgs,
    /// Print JSON instead of CSV
    #[arg(long)]
    json: bool,
}

/// Which curve of growth (shared with `linegrid plot growth`).
#[derive(Args)]
pub struct GrowthCurveArgs {
    /// The line (label)
    #[arg(long, value_name = "LABEL")]
    line: String,
    /// The state that sets the Doppler and damping widths
    #[command(flatten)]
    point: PointArgs,
    /// Microturbulent velocity, km/s
    #[arg(
        long,
        default_value_t = 2.0,
        allow_negative_numbers = true,
        value_name = "KM/S"
    )]
    microturbulence: f64,
    /// Smallest log10 lower-level column (cm^-2)
    #[arg(
        long,
        default_value_t = 8.0,
        allow_negative_numbers = true,
        value_name = "DEX"
    )]
    min_log_column: f64,
    /// Largest log10 lower-level column (cm^-2)
    #[arg(
        long,
        default_value_t = 22.0,
        allow_negative_numbers = true,
        value_name = "DEX"
    )]
    max_log_column: f64,
    /// Number of columns (2 to 10000)
    #[arg(long, default_value_t = 57, value_name = "N")]
    points: usize,
    /// Extra lines from a CSV file
    #[arg(long, value_name = "FILE")]
    line_list: Option<std::path::PathBuf>,
}

/// A computed curve of growth.
pub struct GrowthCurve {
    /// The line.
    pub line: Line,
    /// Its absorption parameters.
    pub absorption: AbsorptionLine,
    /// Doppler width, cm.
    pub doppler_cm: f64,
    /// The gas temperature, K.
    pub temperature: f64,
    /// The gas' electron density, cm⁻³.
    pub electron_density: f64,
    /// The points.
    pub points: Vec<GrowthPoint>,
}

impl GrowthCurveArgs {
    /// Compute the curve.
    pub fn compute(&self) -> Result<GrowthCurve, Failure> {
        let a = self;
        let line = LineArgs::one(&a.line, a.line_list.clone())?;
        if !(a.min_log_column.is_finite()
            && a.max_log_column.is_finite()
            && a.min_log_column < a.max_log_column)
        {
            return Err(Failure::bad_input(anyhow::anyhow!(
                "--min-log-column {} must be below --max-log-column {}",
                a.min_log_column,
                a.max_log_column
            )));
        }
        if !(2..=10_000).contains(&a.points) {
            return Err(Failure::bad_input(anyhow::anyhow!(
                "--points {}: must be between 2 and 10000",
                a.points
            )));
        }
        let (_, state) = a.point.solve(20)?;
        let data = AtomicData::embedded();
        let opts = SlabOptions {
            geometry: Geometry::Thickness(1.0),
            background: Background::Planck(state.temperature),
            microturbulence: a.microturbulence * 1e5,
            view: View::Flux,
            continuum: false,
            damping: None,
        };
        opts.validate().map_err(slab_failure)?;
        let su = formation::setup_line(data, &state, &opts, &line).map_err(slab_failure)?;
        let gl = AbsorptionLine {
            wavelength: line.wavelength_vac,
            f_value: line.f_value(),
            doppler_b: su.widths.doppler_hz * line.wavelength_vac,
            gamma: su.widths.gamma(),
        };
        let step = (a.max_log_column - a.min_log_column) / (a.points - 1) as f64;
        let cols: Vec<f64> = (0..a.points)
            .map(|i| 10f64.powf(a.min_log_column + step * i as f64))
            .collect();
        let points = line_curve_of_growth(&gl, &su, &cols);
        Ok(GrowthCurve {
            line,
            absorption: gl,
            doppler_cm: su.widths.doppler_cm,
            temperature: state.temperature,
            electron_density: state.electron_density,
            points,
        })
    }
}

pub fn growth(a: GrowthArgs) -> Result<(), Failure> {
    let GrowthCurve {
        line,
        absorption: gl,
        doppler_cm,
        points: pts,
        ..
    } = a.curve.compute()?;
    let profile = if pts.iter().any(|p| p.stark.is_some()) {
        "stark"
    } else {
        "voigt"
    };
    if a.json {
        return print_json(&json!({
            "line": line.label, "wavelength_angstrom": line.wavelength() * 1e8, "f": gl.f_value,
            "doppler_width_angstrom": doppler_cm * 1e8, "damping_parameter": gl.damping_parameter(),
            "profile": profile, "points": pts,
        }));
    }
    let mut o = String::new();
    outln!(
        o,
        "# curve of growth: {} ({:.3} A), f = {:.4e}, Doppler width {:.4e} A, a = {:.3e}, {} profile",
        line.label,
        line.wavelength() * 1e8,
        gl.f_value,
        doppler_cm * 1e8,
        gl.damping_parameter(),
        profile
    );
    outln!(
        o,
        "log_column,log_nf_lambda,tau0,w_angstrom,w_linear,w_flat,w_damping,w_stark"
    );
    let opt = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v:.6e}"));
    for p in &pts {
        outln!(
            o,
            "{:.4},{:.4},{:.6e},{:.6e},{:.6e},{},{:.6e},{}",
            p.column.log10(),
            p.log_nf_lambda,
            p.tau0,
            p.equivalent_width,
            p.linear,
            opt(p.flat),
            p.damping,
            opt(p.stark)
        );
    }
    emit(&o)
}
