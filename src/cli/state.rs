//! `linegrid state`: one thermodynamic point.

use clap::{ArgGroup, Args, ValueEnum};
use serde_json::{Map, Value, json};

use linegrid::atoms::AtomicData;
use linegrid::eos::occupation::LevelCutoff;
use linegrid::eos::{self, Composition, Density, EosOptions, State, StateError, StateRequest};

use super::{Failure, print_json};

/// How the bound levels end, as chosen on the command line.
#[derive(Clone, Copy, ValueEnum)]
pub enum CutoffChoice {
    /// Hummer-Mihalas occupation probabilities
    Occupation,
    /// Debye-Hückel lowering of the ionisation energy, hard cut
    Debye,
}

/// Composition options shared by every verb that builds a state.
#[derive(Args, Clone)]
pub struct CompositionArgs {
    /// [M/H] in dex: scales every element heavier than helium (-5 to +5)
    #[arg(
        long,
        default_value_t = 0.0,
        allow_negative_numbers = true,
        value_name = "DEX"
    )]
    pub metallicity: f64,
    /// He/H by number (default: the reference mix, 0.0851)
    #[arg(long, allow_negative_numbers = true, value_name = "RATIO")]
    pub helium_ratio: Option<f64>,
    /// Per-element offset in dex on top of [M/H], e.g. --offset Fe=-0.3 (repeatable)
    #[arg(long, value_name = "EL=DEX", allow_negative_numbers = true)]
    pub offset: Vec<String>,
    /// Hydrogen only (textbook cases); same as --elements H
    #[arg(long, conflicts_with = "elements")]
    pub pure_hydrogen: bool,
    /// Only these elements, comma-separated symbols; must include H (e.g. H,He,Ca)
    #[arg(long, value_delimiter = ',', value_name = "LIST")]
    pub elements: Option<Vec<String>>,
}

impl CompositionArgs {
    /// The composition these options describe.
    pub fn composition(&self) -> Result<Composition, Failure> {
        let mut offsets = Vec::new();
        for o in &self.offset {
            let (el, dex) = o.split_once('=').ok_or_else(|| {
                Failure::bad_input(anyhow::anyhow!(
                    "--offset '{o}': expected ELEMENT=DEX, e.g. Fe=-0.3"
                ))
            })?;
            let dex: f64 = dex.trim().parse().map_err(|_| {
                Failure::bad_input(anyhow::anyhow!(
                    "--offset '{o}': '{dex}' is not a number of dex"
                ))
            })?;
            offsets.push((el.trim().to_string(), dex));
        }
        let elements = if self.pure_hydrogen {
            Some(vec!["H".to_string()])
        } else {
            self.elements
                .as_ref()
                .map(|v| v.iter().map(|s| s.trim().to_string()).collect())
        };
        Ok(Composition {
            metallicity: self.metallicity,
            helium_ratio: self.helium_ratio,
            offsets,
            elements,
        })
    }
}

/// One thermodynamic point: temperature, one density variable, composition, level cut-off.
/// Shared by every verb that needs a state.
#[derive(Args, Clone)]
#[command(group(ArgGroup::new("density").required(true).args(["hydrogen_density", "gas_pressure", "electron_density", "electron_pressure"])))]
pub struct PointArgs {
    /// Temperature in K (1000 to 1e6)
    #[arg(long, allow_negative_numbers = true, value_name = "K")]
    pub temperature: f64,
    /// Total hydrogen density in cm^-3 (all stages)
    #[arg(long, allow_negative_numbers = true, value_name = "CM-3")]
    pub hydrogen_density: Option<f64>,
    /// Gas pressure in dyn cm^-2 (nuclei and electrons)
    #[arg(long, allow_negative_numbers = true, value_name = "DYN/CM2")]
    pub gas_pressure: Option<f64>,
    /// Electron density in cm^-3
    #[arg(long, allow_negative_numbers = true, value_name = "CM-3")]
    pub electron_density: Option<f64>,
    /// Electron pressure n_e k T in dyn cm^-2
    #[arg(long, allow_negative_numbers = true, value_name = "DYN/CM2")]
    pub electron_pressure: Option<f64>,
    #[command(flatten)]
    pub composition: CompositionArgs,
    /// How the bound levels end
    #[arg(long, value_enum, default_value = "occupation")]
    pub cutoff: CutoffChoice,
}

impl PointArgs {
    /// The state request these options describe, listing `levels` hydrogen shells.
    pub fn request(&self, levels: u32) -> Result<StateRequest, Failure> {
        let density = match (
            self.hydrogen_density,
            self.gas_pressure,
            self.electron_density,
            self.electron_pressure,
        ) {
            (Some(v), _, _, _) => Density::HydrogenDensity(v),
            (_, Some(v), _, _) => Density::GasPressure(v),
            (_, _, Some(v), _) => Density::ElectronDensity(v),
            (_, _, _, Some(v)) => Density::ElectronPressure(v),
            _ => unreachable!("clap requires one density option"),
        };
        Ok(StateRequest {
            temperature: self.temperature,
            density,
            composition: self.composition.composition()?,
            options: EosOptions {
                cutoff: match self.cutoff {
                    CutoffChoice::Occupation => LevelCutoff::OccupationProbability,
                    CutoffChoice::Debye => LevelCutoff::Debye,
                },
                hydrogen_levels: levels,
            },
        })
    }

    /// Solve the point; bad input maps to exit 2, non-convergence to exit 1.
    pub fn solve(&self, levels: u32) -> Result<(StateRequest, State), Failure> {
        let req = self.request(levels)?;
        match eos::solve_with(AtomicData::embedded(), &req) {
            Ok(s) => Ok((req, s)),
            Err(StateError::Input(e)) => Err(Failure::from_lib(e)),
            Err(StateError::NotConverged(nc)) => Err(Failure::failed(nc)),
        }
    }
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid state --temperature 9500 --electron-pressure 200 --pure-hydrogen\n  linegrid state --temperature 5800 --gas-pressure 1.2e5 --metallicity -0.5 --json\n  linegrid state --temperature 20000 --hydrogen-density 1e15 --elements H,He --cutoff debye\n  linegrid state --temperature 8000 --hydrogen-density 1e11 --populations cr --thickness 1e8"
)]
pub struct StateArgs {
    #[command(flatten)]
    point: PointArgs,
    /// Number of hydrogen shells to list (1 to 1000)
    #[arg(long, default_value_t = 20, value_name = "N")]
    levels: u32,
    #[command(flatten)]
    populations: super::populations::PopulationArgs,
    /// With --populations cr: line escape from a slab of this thickness, cm (default: all lines optically thin)
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "CM",
        conflicts_with = "hydrogen_column"
    )]
    thickness: Option<f64>,
    /// With --populations cr: line escape from a slab of this hydrogen column, cm^-2
    #[arg(long, allow_negative_numbers = true, value_name = "CM-2")]
    hydrogen_column: Option<f64>,
    /// With --populations cr: microturbulence for the line escape, km/s
    #[arg(
        long,
        default_value_t = 2.0,
        allow_negative_numbers = true,
        value_name = "KM/S"
    )]
    microturbulence: f64,
    /// Print JSON (field names are stable; see README)
    #[arg(long)]
    json: bool,
}

/// The escape of the collisional-radiative model in `state` and its description.
fn state_escape(a: &StateArgs, s: &State) -> Result<(linegrid::nlte::Escape, String), Failure> {
    use linegrid::nlte::Escape;
    let micro = a.microturbulence;
    if !(micro.is_finite() && (0.0..1000.0).contains(&micro)) {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "invalid --microturbulence = {micro}: must be between 0 and 1000 km/s"
        )));
    }
    let thickness = match (a.thickness, a.hydrogen_column) {
        (Some(l), _) => Some((l, format!("slab of {l:e} cm"))),
        (_, Some(n)) => Some((
            n / s.hydrogen_density,
            format!("slab of hydrogen column {n:e} cm^-2"),
        )),
        _ => None,
    };
    Ok(match thickness {
        None => (Escape::Thin, "optically thin lines".into()),
        Some((l, what)) => (
            Escape::Slab {
                thickness: l,
                microturbulence: micro * 1e5,
            },
            what,
        ),
    })
}

pub fn run(a: StateArgs) -> Result<(), Failure> {
    let req = a.point.request(a.levels)?;
    let cr = a.populations.settings()?;
    if cr.is_none() && (a.thickness.is_some() || a.hydrogen_column.is_some()) {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--thickness and --hydrogen-column apply to `state` only with --populations cr"
        )));
    }
    let data = AtomicData::embedded();
    match eos::solve_with(data, &req) {
        Ok(s) => {
            let cr_part = match &cr {
                None => None,
                Some(c) => {
                    let (escape, what) = state_escape(&a, &s)?;
                    let sol =
                        linegrid::formation::departures::solve_with_escape(data, &s, c, escape)
                            .map_err(super::populations::cr_failure)?;
                    Some((c, what, sol))
                }
            };
            if a.json {
                let mut v = state_json(data, &req, &s);
                if let Some((c, what, sol)) = &cr_part {
                    v["collisional_radiative"] = super::populations::cr_json(c, what, sol);
                }
                print_json(&v)
            } else {
                let mut text = state_text(data, &req, &s);
                if let Some((c, what, sol)) = &cr_part {
                    text.push('\n');
                    text.push_str(&super::populations::cr_text(c, what, sol));
                }
                super::emit(&text)
            }
        }
        Err(StateError::Input(e)) => Err(Failure::from_lib(e)),
        Err(StateError::NotConverged(nc)) => {
            if a.json {
                print_json(
                    &json!({"status": "not-converged", "reason": nc.reason, "detail": nc.to_string()}),
                )?;
            }
            Err(Failure::failed(nc))
        }
    }
}

/// The stable JSON form of a state (documented in the README).
pub fn state_json(data: &AtomicData, req: &StateRequest, s: &State) -> Value {
    let mut species = Map::new();
    for (sp, st) in data.species.iter().zip(&s.species) {
        if s.abundances[sp.element] <= 0.0 {
            continue;
        }
        species.insert(
            sp.name.clone(),
            json!({
                "element": data.elements[sp.element].symbol,
                "charge": sp.charge,
                "density": st.density,
                "fraction": st.fraction,
                "partition_function": st.partition_function,
                "log_partition_function": st.partition_function.log10(),
                "ionization_ev": st.ionization_ev,
            }),
        );
    }
    let elements: Vec<&str> = data
        .elements
        .iter()
        .zip(&s.abundances)
        .filter(|(_, a)| **a > 0.0)
        .map(|(e, _)| e.symbol.as_str())
        .collect();
    json!({
        "status": "converged",
        "temperature": s.temperature,
        "electron_density": s.electron_density,
        "electron_pressure": s.electron_density * linegrid::constants::K_B * s.temperature,
        "gas_pressure": s.gas_pressure,
        "hydrogen_density": s.hydrogen_density,
        "mass_density": s.mass_density,
        "mean_molecular_weight": s.mean_molecular_weight,
        "iterations": s.iterations,
        "cutoff": req.options.cutoff.name(),
        "composition": {
            "metallicity": req.composition.metallicity,
            "helium_ratio": s.abundances.get(1).copied(),
            "elements": elements,
        },
        "species": species,
        "hydrogen_levels": s.hydrogen_levels.iter().map(|l| json!({
            "n": l.n,
            "energy_ev": l.energy_ev,
            "weight": l.weight,
            "population": l.population,
            "occupation_probability": l.occupation_probability,
        })).collect::<Vec<_>>(),
    })
}

fn state_text(data: &AtomicData, req: &StateRequest, s: &State) -> String {
    let mut o = String::new();
    let k = linegrid::constants::K_B;
    outln!(
        o,
        "Thermodynamic state (LTE, {} level cut-off)",
        req.options.cutoff.name()
    );
    outln!(o, "  temperature            {:>12.1} K", s.temperature);
    outln!(
        o,
        "  electron density       {:>12.4e} cm^-3",
        s.electron_density
    );
    outln!(
        o,
        "  electron pressure      {:>12.4e} dyn cm^-2",
        s.electron_density * k * s.temperature
    );
    outln!(
        o,
        "  gas pressure           {:>12.4e} dyn cm^-2",
        s.gas_pressure
    );
    outln!(
        o,
        "  hydrogen density       {:>12.4e} cm^-3",
        s.hydrogen_density
    );
    outln!(
        o,
        "  mass density           {:>12.4e} g cm^-3",
        s.mass_density
    );
    outln!(
        o,
        "  mean molecular weight  {:>12.5}",
        s.mean_molecular_weight
    );
    outln!(o, "  iterations             {:>12}", s.iterations);
    outln!(o);
    outln!(
        o,
        "  {:<8} {:>12} {:>12} {:>10} {:>9}",
        "species",
        "density",
        "fraction",
        "U",
        "chi/eV"
    );
    for (sp, st) in data.species.iter().zip(&s.species) {
        if s.abundances[sp.element] <= 0.0 {
            continue;
        }
        let chi = st
            .ionization_ev
            .map_or("-".to_string(), |c| format!("{c:.4}"));
        outln!(
            o,
            "  {:<8} {:>12.4e} {:>12.4e} {:>10.4} {:>9}",
            sp.name,
            st.density,
            st.fraction,
            st.partition_function,
            chi
        );
    }
    if !s.hydrogen_levels.is_empty() && s.abundances[0] > 0.0 {
        outln!(o);
        outln!(
            o,
            "  hydrogen shells (population in cm^-3, w = occupation probability)"
        );
        outln!(
            o,
            "  {:>4} {:>10} {:>12} {:>12}",
            "n",
            "E/eV",
            "population",
            "w"
        );
        for l in &s.hydrogen_levels {
            outln!(
                o,
                "  {:>4} {:>10.5} {:>12.4e} {:>12.4e}",
                l.n,
                l.energy_ev,
                l.population,
                l.occupation_probability
            );
        }
    }
    o
}
