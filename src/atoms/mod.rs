//! Atomic data: hydrogenic systems computed exactly, and the curated species table
//! (`data/species.toml`, embedded at compile time) with levels and ionisation energies for
//! partition functions and the Saha equation. Each table entry carries its provenance.

pub mod hydrogenic;
pub mod lines;

use std::collections::HashMap;
use std::sync::OnceLock;

use serde::Deserialize;

use crate::constants::M_E;
use hydrogenic::Hydrogenic;

/// The embedded species table, as text (its digest goes into grid-file provenance).
pub const SPECIES_TOML: &str = include_str!("data/species.toml");

/// An error in an atomic-data table.
#[derive(Debug, thiserror::Error)]
pub enum AtomicDataError {
    /// The TOML text does not parse or has unknown or missing keys.
    #[error("{file}: {message}")]
    Syntax {
        /// The file (or "embedded species table").
        file: String,
        /// The parser's message, with line and column.
        message: String,
    },
    /// A value is out of range or inconsistent.
    #[error("{file}: species or element '{entry}': {message}")]
    Invalid {
        /// The file.
        file: String,
        /// The entry concerned.
        entry: String,
        /// What is wrong.
        message: String,
    },
}

/// A chemical element.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct Element {
    /// Chemical symbol, e.g. "Fe".
    pub symbol: String,
    /// English name.
    pub name: String,
    /// Atomic number.
    pub z: u32,
    /// Standard atomic weight, u.
    pub mass_amu: f64,
    /// Reference abundance log ε = log10(N_el/N_H) + 12.
    pub log_eps: f64,
    /// Where the abundance comes from.
    pub log_eps_source: String,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpecies {
    name: String,
    element: String,
    charge: i32,
    ionization_ev: Option<f64>,
    #[serde(default)]
    hydrogenic: bool,
    #[serde(default)]
    levels_cm: Vec<(f64, f64)>,
    source: String,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTable {
    element: Vec<Element>,
    species: Vec<RawSpecies>,
}

/// One tabulated level: energy above the ground level (cm⁻¹) and statistical weight.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Level {
    /// Energy above the ground level, cm⁻¹.
    pub energy_cm: f64,
    /// Statistical weight g.
    pub g: f64,
}

/// One ionisation stage of an element.
#[derive(Debug, Clone)]
pub struct Species {
    /// Spectroscopic name: "Fe I", "Ca II", "H-".
    pub name: String,
    /// Index of the element in [`AtomicData::elements`].
    pub element: usize,
    /// Net charge (−1 for H⁻).
    pub charge: i32,
    /// Energy to the ground state of the next stage, eV (`None` for the top stage).
    pub ionization_ev: Option<f64>,
    /// Computed exactly as a one-electron system (levels not tabulated).
    pub hydrogenic: Option<Hydrogenic>,
    /// Tabulated levels (empty for hydrogenic species).
    pub levels: Vec<Level>,
    /// Provenance of the numbers.
    pub source: String,
}

/// The whole atomic data set: elements and their stages.
#[derive(Debug, Clone)]
pub struct AtomicData {
    /// Elements in table order.
    pub elements: Vec<Element>,
    /// Species grouped by element, stages in ascending charge.
    pub species: Vec<Species>,
    /// For each element, the range of its species in `species`.
    pub stages: Vec<std::ops::Range<usize>>,
    /// FNV-1a 64-bit digest of the table text, hex (identifies the data in provenance).
    pub digest: String,
    by_name: HashMap<String, usize, std::hash::BuildHasherDefault<Fnv1a>>,
}

/// FNV-1a as a `Hasher` for the short species names looked up on hot paths (a few bytes:
/// the default SipHash costs hundreds of instructions per look-up; the keys are our own table,
/// so hash flooding is no concern).
#[derive(Debug, Clone, Copy)]
pub struct Fnv1a(u64);

impl Default for Fnv1a {
    fn default() -> Self {
        Fnv1a(0xcbf2_9ce4_8422_2325)
    }
}

impl std::hash::Hasher for Fnv1a {
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 ^= u64::from(b);
            self.0 = self.0.wrapping_mul(0x0100_0000_01b3);
        }
    }

    fn finish(&self) -> u64 {
        self.0
    }
}

/// FNV-1a 64-bit hash of a text, as 16 hex digits (a fingerprint, not a security hash).
pub fn fnv1a_hex(text: &str) -> String {
    use std::hash::Hasher;
    let mut h = Fnv1a::default();
    h.write(text.as_bytes());
    format!("{:016x}", h.finish())
}

/// Roman numeral for a stage number (1 → "I").
pub fn roman(stage: u32) -> String {
    const R: [(u32, &str); 6] = [
        (40, "XL"),
        (10, "X"),
        (9, "IX"),
        (5, "V"),
        (4, "IV"),
        (1, "I"),
    ];
    let mut n = stage;
    let mut s = String::new();
    for &(v, r) in &R {
        while n >= v {
            s.push_str(r);
            n -= v;
        }
    }
    s
}

impl AtomicData {
    /// The embedded table, parsed once.
    pub fn embedded() -> &'static AtomicData {
        static DATA: OnceLock<AtomicData> = OnceLock::new();
        DATA.get_or_init(|| {
            AtomicData::parse(SPECIES_TOML, "embedded species table")
                .expect("the embedded species table is validated by the test suite")
        })
    }

    /// Parse and validate a species table.
    pub fn parse(text: &str, file: &str) -> Result<AtomicData, AtomicDataError> {
        let raw: RawTable = toml::from_str(text).map_err(|e| AtomicDataError::Syntax {
            file: file.to_string(),
            message: e.to_string(),
        })?;
        let invalid = |entry: &str, message: String| AtomicDataError::Invalid {
            file: file.to_string(),
            entry: entry.to_string(),
            message,
        };
        let mut el_index = HashMap::new();
        for (i, e) in raw.element.iter().enumerate() {
            if !(e.mass_amu > 0.0 && e.mass_amu.is_finite()) || e.z == 0 {
                return Err(invalid(&e.symbol, "mass and z must be positive".into()));
            }
            if el_index.insert(e.symbol.clone(), i).is_some() {
                return Err(invalid(&e.symbol, "element listed twice".into()));
            }
        }
        let mut species: Vec<Species> = Vec::with_capacity(raw.species.len());
        let mut by_name = HashMap::default();
        for s in raw.species {
            let Some(&ei) = el_index.get(&s.element) else {
                return Err(invalid(&s.name, format!("unknown element '{}'", s.element)));
            };
            let el = &raw.element[ei];
            let expected = if s.charge < 0 {
                format!("{}-", el.symbol)
            } else {
                format!("{} {}", el.symbol, roman((s.charge + 1) as u32))
            };
            if s.name != expected {
                return Err(invalid(
                    &s.name,
                    format!("name should be '{expected}' for charge {}", s.charge),
                ));
            }
            if s.charge > el.z as i32 {
                return Err(invalid(&s.name, "charge exceeds the atomic number".into()));
            }
            if let Some(chi) = s.ionization_ev
                && !(chi > 0.0 && chi.is_finite())
            {
                return Err(invalid(&s.name, "ionization_ev must be positive".into()));
            }
            let hydrogenic = if s.hydrogenic {
                if el.z as i32 - s.charge != 1 {
                    return Err(invalid(
                        &s.name,
                        "hydrogenic species must have one electron".into(),
                    ));
                }
                if !s.levels_cm.is_empty() {
                    return Err(invalid(
                        &s.name,
                        "hydrogenic species take no levels_cm".into(),
                    ));
                }
                let nuclear_mass = match el.z {
                    1 => crate::constants::M_P,
                    2 => crate::constants::M_ALPHA,
                    z => el.mass_amu * crate::constants::AMU - f64::from(z) * M_E,
                };
                Some(Hydrogenic {
                    z: el.z,
                    nuclear_mass,
                })
            } else {
                if s.levels_cm.is_empty() {
                    return Err(invalid(&s.name, "levels_cm is empty".into()));
                }
                if s.levels_cm[0].0 != 0.0 {
                    return Err(invalid(
                        &s.name,
                        "the first level must be at 0 cm^-1".into(),
                    ));
                }
                for w in s.levels_cm.windows(2) {
                    if w[1].0 < w[0].0 {
                        return Err(invalid(
                            &s.name,
                            format!("levels not ascending at {} cm^-1", w[1].0),
                        ));
                    }
                }
                if s.levels_cm
                    .iter()
                    .any(|&(e, g)| g.is_nan() || g <= 0.0 || !e.is_finite())
                {
                    return Err(invalid(
                        &s.name,
                        "weights must be positive, energies finite".into(),
                    ));
                }
                None
            };
            if by_name.insert(s.name.clone(), species.len()).is_some() {
                return Err(invalid(&s.name, "species listed twice".into()));
            }
            species.push(Species {
                name: s.name,
                element: ei,
                charge: s.charge,
                ionization_ev: s.ionization_ev,
                hydrogenic,
                levels: s
                    .levels_cm
                    .iter()
                    .map(|&(energy_cm, g)| Level { energy_cm, g })
                    .collect(),
                source: s.source,
            });
        }
        // Group stages per element: contiguous, ascending charge, steps of one, every stage
        // but the last with an ionisation energy.
        let mut stages = Vec::with_capacity(raw.element.len());
        let mut i = 0;
        for (ei, el) in raw.element.iter().enumerate() {
            let start = i;
            while i < species.len() && species[i].element == ei {
                i += 1;
            }
            if start == i {
                return Err(invalid(
                    &el.symbol,
                    "no species listed (or not grouped by element in element order)".into(),
                ));
            }
            for k in start..i {
                if k > start && species[k].charge != species[k - 1].charge + 1 {
                    return Err(invalid(
                        &species[k].name,
                        "stages must ascend by one charge".into(),
                    ));
                }
                if k + 1 < i && species[k].ionization_ev.is_none() {
                    return Err(invalid(
                        &species[k].name,
                        "ionization_ev missing below the top stage".into(),
                    ));
                }
                if k + 1 == i && species[k].ionization_ev.is_some() {
                    return Err(invalid(
                        &species[k].name,
                        "the top stage takes no ionization_ev".into(),
                    ));
                }
            }
            stages.push(start..i);
        }
        if i != species.len() {
            return Err(invalid(
                &species[i].name,
                "species not grouped by element in element order".into(),
            ));
        }
        Ok(AtomicData {
            elements: raw.element,
            species,
            stages,
            digest: fnv1a_hex(text),
            by_name,
        })
    }

    /// Index of a species by spectroscopic name ("Ca II", "H I", "H-"; surrounding spaces
    /// ignored).
    pub fn species_index(&self, name: &str) -> Option<usize> {
        self.by_name.get(name.trim()).copied()
    }

    /// Index of an element by symbol (case-sensitive: "Fe").
    pub fn element_index(&self, symbol: &str) -> Option<usize> {
        self.elements.iter().position(|e| e.symbol == symbol.trim())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv1a_matches_the_published_test_vectors() {
        // FNV-1a 64-bit test vectors of the algorithm's authors (Fowler, Noll & Vo; from
        // memory, and recomputed by hand in Python): "", "a", "foobar".
        assert_eq!(fnv1a_hex(""), "cbf29ce484222325");
        assert_eq!(fnv1a_hex("a"), "af63dc4c8601ec8c");
        assert_eq!(fnv1a_hex("foobar"), "85944171f73967e8");
        // and the species look-up that hashes with it
        let d = AtomicData::embedded();
        let k = d.species_index("Ca II").unwrap();
        assert_eq!(d.species[k].name, "Ca II");
        assert_eq!(d.species_index(" H I "), d.species_index("H I"));
        assert_eq!(d.species_index("H-").map(|k| d.species[k].charge), Some(-1));
        assert_eq!(d.species_index("Xx IX"), None);
    }

    #[test]
    fn embedded_table_parses_and_covers_the_required_species() {
        let d = AtomicData::embedded();
        // The elements the foundation issue requires, plus Li, Sr and Ba (catalogue lines).
        for sym in [
            "H", "He", "Li", "C", "N", "O", "Ne", "Na", "Mg", "Al", "Si", "S", "K", "Ca", "Ti",
            "Cr", "Mn", "Fe", "Ni", "Sr", "Ba",
        ] {
            let e = d
                .element_index(sym)
                .unwrap_or_else(|| panic!("{sym} missing"));
            let r = d.stages[e].clone();
            assert!(r.len() >= 3, "{sym}: stages {r:?}");
            assert!(!d.species[r.start].source.is_empty());
        }
        assert!(d.species_index("H-").is_some());
        assert!(
            d.species[d.species_index("H I").unwrap()]
                .hydrogenic
                .is_some()
        );
        assert!(
            d.species[d.species_index("He II").unwrap()]
                .hydrogenic
                .is_some()
        );
        assert!(d.species_index("Fe III").is_some());
        // Li III is hydrogen-like (Z = 3), Li IV the bare nucleus and the top stage.
        let li3 = &d.species[d.species_index("Li III").unwrap()];
        assert_eq!(li3.hydrogenic.map(|h| h.z), Some(3));
        let li = d.element_index("Li").unwrap();
        assert_eq!(d.species[d.stages[li].end - 1].name, "Li IV");
        for name in ["Sr IV", "Ba IV"] {
            let k = d.species_index(name).unwrap();
            assert!(
                d.species[k].ionization_ev.is_none(),
                "{name} is a top stage"
            );
        }
        // The table's element order is by atomic number (header convention).
        assert!(d.elements.windows(2).all(|w| w[0].z < w[1].z));
        assert_eq!(
            (d.elements.len(), d.species.len()),
            (21, 82),
            "elements and species (update README/DEVELOPERS if this changes)"
        );
        assert_eq!(d.digest.len(), 16);
    }

    #[test]
    fn roman_numerals() {
        assert_eq!(roman(1), "I");
        assert_eq!(roman(4), "IV");
        assert_eq!(roman(9), "IX");
        assert_eq!(roman(14), "XIV");
        assert_eq!(roman(27), "XXVII");
    }

    #[test]
    fn bad_tables_are_refused_with_the_entry_named() {
        let good = r#"
[[element]]
symbol = "X"
name = "x"
z = 3
mass_amu = 7.0
log_eps = 1.0
log_eps_source = "test"
[[species]]
name = "X I"
element = "X"
charge = 0
ionization_ev = 5.0
levels_cm = [[0.0, 2]]
source = "test"
[[species]]
name = "X II"
element = "X"
charge = 1
levels_cm = [[0.0, 1]]
source = "test"
"#;
        assert!(AtomicData::parse(good, "t.toml").is_ok());
        let bad = good.replace("[[0.0, 2]]", "[[1.0, 2]]");
        let e = AtomicData::parse(&bad, "t.toml").unwrap_err().to_string();
        assert!(e.contains("X I") && e.contains("0 cm^-1"), "{e}");
        let bad = good.replace("name = \"X II\"", "name = \"X III\"");
        assert!(
            AtomicData::parse(&bad, "t.toml")
                .unwrap_err()
                .to_string()
                .contains("X II")
        );
        let bad = good.replace("log_eps = 1.0", "log_eps = 1.0\ncolour = 3");
        assert!(matches!(
            AtomicData::parse(&bad, "t.toml"),
            Err(AtomicDataError::Syntax { .. })
        ));
    }
}
