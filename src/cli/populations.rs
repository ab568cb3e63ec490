//! Options of the populations model, shared by `state` and `slab`.

use clap::{Args, ValueEnum};
use serde_json::{Value, json};

use linegrid::formation::departures::CrSettings;
use linegrid::nlte::{CrError, CrSolution, RadiationField};

use super::Failure;

/// Populations model.
#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PopulationsChoice {
    /// Saha-Boltzmann populations (local thermodynamic equilibrium)
    Lte,
    /// Collisional-radiative hydrogen with escape probabilities (departure coefficients)
    Cr,
}

/// The populations model and its settings.
#[derive(Args, Clone)]
pub struct PopulationArgs {
    /// Populations model of hydrogen
    #[arg(long, value_enum, default_value = "lte")]
    pub populations: PopulationsChoice,
    /// Bundled hydrogen shells of the collisional-radiative model (2 to 70)
    #[arg(long, default_value_t = linegrid::nlte::DEFAULT_LEVELS, value_name = "N")]
    pub cr_levels: u32,
    /// Dilution factor W of the external Planck field (0 = dark, 1 = black body)
    #[arg(
        long,
        default_value_t = 0.0,
        allow_negative_numbers = true,
        value_name = "W"
    )]
    pub dilution: f64,
    /// Temperature of the external Planck field, K (needed when --dilution > 0)
    #[arg(long, allow_negative_numbers = true, value_name = "K")]
    pub radiation_temperature: Option<f64>,
    /// Case B: Lyman lines optically thick, recombinations to n = 1 reabsorbed on the spot
    #[arg(long)]
    pub case_b: bool,
}

impl PopulationArgs {
    /// The collisional-radiative settings, or `None` for LTE; options that only make sense
    /// with `--populations cr` are refused otherwise.
    pub fn settings(&self) -> Result<Option<CrSettings>, Failure> {
        let bad = |m: String| Err(Failure::bad_input(anyhow::anyhow!(m)));
        if self.populations == PopulationsChoice::Lte {
            if self.dilution != 0.0 || self.radiation_temperature.is_some() || self.case_b {
                return bad(
                    "--dilution, --radiation-temperature and --case-b apply only with --populations cr"
                        .into(),
                );
            }
            return Ok(None);
        }
        let temperature = match (self.dilution, self.radiation_temperature) {
            (w, None) if w > 0.0 => {
                return bad(format!(
                    "--dilution {w} needs --radiation-temperature (K) as well"
                ));
            }
            (_, t) => t.unwrap_or(1.0e4),
        };
        Ok(Some(CrSettings {
            levels: self.cr_levels,
            field: RadiationField {
                dilution: self.dilution,
                temperature,
            },
            case_b: self.case_b,
        }))
    }
}

/// Map a collisional-radiative error: bad input → exit 2, no convergence → exit 1.
pub fn cr_failure(e: CrError) -> Failure {
    match e {
        CrError::Invalid { .. } => Failure::bad_input(e),
        CrError::NotConverged { .. } => Failure::failed(e),
    }
}

/// The stable JSON form of a collisional-radiative solution.
pub fn cr_json(cr: &CrSettings, escape: &str, sol: &CrSolution) -> Value {
    json!({
        "shells": cr.levels,
        "dilution": cr.field.dilution,
        "radiation_temperature": cr.field.temperature,
        "case_b": cr.case_b,
        "escape": escape,
        "electron_density": sol.electron_density,
        "proton_density": sol.proton_density,
        "ionised_fraction": sol.ionised_fraction,
        "iterations": sol.iterations,
        "levels": sol.levels.iter().map(|l| json!({
            "n": l.n,
            "population": l.population,
            "lte_population": l.lte_population,
            "departure": l.departure,
        })).collect::<Vec<_>>(),
    })
}

/// A text table of a collisional-radiative solution.
pub fn cr_text(cr: &CrSettings, escape: &str, sol: &CrSolution) -> String {
    let mut o = String::new();
    outln!(
        o,
        "Collisional-radiative hydrogen ({} shells, W = {}, T_R = {} K{}; escape: {escape})",
        cr.levels,
        cr.field.dilution,
        cr.field.temperature,
        if cr.case_b { ", case B" } else { "" }
    );
    outln!(
        o,
        "  electron density       {:>12.4e} cm^-3",
        sol.electron_density
    );
    outln!(
        o,
        "  ionised fraction       {:>12.4e}",
        sol.ionised_fraction
    );
    outln!(o, "  iterations             {:>12}", sol.iterations);
    outln!(
        o,
        "  {:>4} {:>12} {:>12} {:>12}",
        "n",
        "population",
        "LTE",
        "b_n"
    );
    for l in &sol.levels {
        outln!(
            o,
            "  {:>4} {:>12.4e} {:>12.4e} {:>12.5e}",
            l.n,
            l.population,
            l.lte_population,
            l.departure
        );
    }
    o
}
