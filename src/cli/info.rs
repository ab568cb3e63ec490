//! `linegrid constants` and `linegrid atoms`: what the tool computes with.

use clap::Args;
use serde_json::json;

use linegrid::atoms::AtomicData;
use linegrid::constants;

use super::{Failure, print_json};

#[derive(Args)]
#[command(after_help = "Examples:\n  linegrid constants\n  linegrid constants --json")]
pub struct ConstantsArgs {
    /// Print JSON: {"edition": ..., "constants": {NAME: {"value", "units", "description"}}}
    #[arg(long)]
    json: bool,
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid atoms\n  linegrid atoms --json\n  linegrid atoms --species \"Fe I\""
)]
pub struct AtomsArgs {
    /// Print JSON: {"elements": [...], "species": [...]}
    #[arg(long)]
    json: bool,
    /// Show the level list of one species (spectroscopic name, e.g. "Ca II")
    #[arg(long, value_name = "NAME")]
    species: Option<String>,
}

pub fn constants(a: ConstantsArgs) -> Result<(), Failure> {
    let table = constants::table();
    if a.json {
        let mut m = serde_json::Map::new();
        for c in &table {
            m.insert(
                c.name.to_string(),
                json!({"value": c.value, "units": c.units, "description": c.description}),
            );
        }
        return print_json(&json!({"edition": constants::EDITION, "constants": m}));
    }
    let mut o = String::new();
    outln!(o, "Physical constants, CGS units, {}", constants::EDITION);
    for c in &table {
        outln!(
            o,
            "  {:<14} {:>22.12e}  {:<22} {}",
            c.name,
            c.value,
            c.units,
            c.description
        );
    }
    super::emit(&o)
}

pub fn atoms(a: AtomsArgs) -> Result<(), Failure> {
    let d = AtomicData::embedded();
    if let Some(name) = &a.species {
        let k = d.species_index(name).ok_or_else(|| {
            Failure::bad_input(anyhow::anyhow!(
                "--species: unknown species '{name}' (known: {})",
                d.species
                    .iter()
                    .map(|s| s.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })?;
        let s = &d.species[k];
        if a.json {
            return print_json(&json!({
                "name": s.name, "charge": s.charge, "ionization_ev": s.ionization_ev,
                "hydrogenic": s.hydrogenic.is_some(), "source": s.source,
                "levels": s.levels.iter().map(|l| json!({"energy_cm": l.energy_cm, "g": l.g})).collect::<Vec<_>>(),
            }));
        }
        let mut o = String::new();
        outln!(
            o,
            "{}  (charge {}, ionisation energy {:?} eV)",
            s.name,
            s.charge,
            s.ionization_ev
        );
        outln!(o, "source: {}", s.source);
        if s.hydrogenic.is_some() {
            outln!(
                o,
                "levels: computed exactly (hydrogen-like, bundled n, g = 2n^2)"
            );
        }
        for l in &s.levels {
            outln!(o, "  {:>12.3} cm^-1   g = {}", l.energy_cm, l.g);
        }
        return super::emit(&o);
    }
    if a.json {
        let elements: Vec<_> = d
            .elements
            .iter()
            .map(|e| json!({"symbol": e.symbol, "name": e.name, "z": e.z, "mass_amu": e.mass_amu, "log_eps": e.log_eps, "log_eps_source": e.log_eps_source}))
            .collect();
        let species: Vec<_> = d
            .species
            .iter()
            .map(|s| {
                json!({"name": s.name, "element": d.elements[s.element].symbol, "charge": s.charge,
                       "ionization_ev": s.ionization_ev, "n_levels": s.levels.len(),
                       "hydrogenic": s.hydrogenic.is_some(), "source": s.source})
            })
            .collect();
        return print_json(&json!({"digest": d.digest, "elements": elements, "species": species}));
    }
    let mut o = String::new();
    outln!(o, "Curated atomic data (digest {})", d.digest);
    outln!(
        o,
        "{:<4} {:>3} {:>9} {:>7}   stages",
        "el",
        "Z",
        "mass/u",
        "log eps"
    );
    for (e, r) in d.elements.iter().zip(&d.stages) {
        let stages: Vec<String> = d.species[r.clone()]
            .iter()
            .map(|s| match (s.ionization_ev, s.hydrogenic.is_some()) {
                (Some(c), true) => format!("{} ({c:.3} eV, exact levels)", s.name),
                (Some(c), false) => format!("{} ({c:.3} eV, {} levels)", s.name, s.levels.len()),
                (None, _) => format!("{} (top)", s.name),
            })
            .collect();
        outln!(
            o,
            "{:<4} {:>3} {:>9.4} {:>7.2}   {}",
            e.symbol,
            e.z,
            e.mass_amu,
            e.log_eps,
            stages.join(", ")
        );
    }
    super::emit(&o)
}

#[derive(Args)]
#[command(
    after_help = "Examples:\n  linegrid lines --family Balmer\n  linegrid lines --species \"Ca II\" --json\n  linegrid lines --min-wavelength 400 --max-wavelength 700"
)]
pub struct LinesArgs {
    #[command(flatten)]
    select: super::slab::LineArgs,
    /// Print JSON
    #[arg(long)]
    json: bool,
}

pub fn lines(a: LinesArgs) -> Result<(), Failure> {
    let cat = a.select.catalogue()?;
    let lines = a.select.select(&cat)?;
    if a.json {
        return print_json(&serde_json::to_value(&lines).map_err(Failure::failed)?);
    }
    let mut o = String::new();
    outln!(
        o,
        "{:<16} {:<7} {:>12} {:>4} {:>12} {:>12} {:>8}  family / source",
        "label",
        "species",
        "lambda/A",
        "",
        "E_low/cm-1",
        "E_up/cm-1",
        "log gf"
    );
    for l in &lines {
        outln!(
            o,
            "{:<16} {:<7} {:>12.3} {:>4} {:>12.2} {:>12.2} {:>8.3}  {} / {}",
            l.label,
            l.species,
            l.wavelength() * 1e8,
            if l.wavelength_air.is_some() {
                "air"
            } else {
                "vac"
            },
            l.lower_cm,
            l.upper_cm,
            l.log_gf,
            l.family,
            l.source
        );
    }
    outln!(o, "{} lines", lines.len());
    super::emit(&o)
}
