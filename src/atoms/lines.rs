//! The line catalogue: hydrogen and He II series generated exactly, curated lines of He I and
//! metals (`data/lines.toml`, embedded at compile time, each with its provenance), and user
//! lines from a CSV file in our own format.
//!
//! Wavelengths are kept in vacuum (cm); the air wavelength (Morton 2000 index) is derived for
//! lines above 200 nm, where it is the customary one to quote.
//!
//! User line CSV (header row required, columns in any order, `#` starts a comment line):
//!
//! | column | required | meaning |
//! |---|---|---|
//! | `label` | yes | unique name used on the command line |
//! | `species` | yes | spectroscopic name, e.g. `Fe I` (must be in the species table) |
//! | `wavelength_vac_nm` or `wavelength_air_nm` | one of them | line wavelength |
//! | `lower_cm`, `upper_cm` | yes | level energies above the species' ground, cm⁻¹ |
//! | `g_lower`, `g_upper` | yes | statistical weights |
//! | `log_gf` | yes | log10 of g_lower × f |
//! | `gamma_rad` | no | radiative damping, s⁻¹ (default: classical) |
//! | `log_gamma_stark` | no | log10 quadratic-Stark FWHM per electron at 10⁴ K, rad s⁻¹ cm³ |
//! | `log_gamma_vdw` | no | log10 van der Waals FWHM per H atom at 10⁴ K, rad s⁻¹ cm³ |
//! | `family` | no | grouping for selection (default: the species) |
//! | `source` | no | provenance (default: the file name) |

use std::collections::HashMap;
use std::sync::OnceLock;

use serde::Deserialize;

use super::AtomicData;
use super::hydrogenic::{Hydrogenic, vacuum_to_air};

/// The embedded curated line list, as text.
pub const LINES_TOML: &str = include_str!("data/lines.toml");

/// Series names by lower shell (the trade's names), n = 1 … 6.
pub const HYDROGEN_SERIES: [(&str, &str); 6] = [
    ("Lyman", "Ly"),
    ("Balmer", "H"),
    ("Paschen", "Pa"),
    ("Brackett", "Br"),
    ("Pfund", "Pf"),
    ("Humphreys", "Hu"),
];

const GREEK: [&str; 5] = ["alpha", "beta", "gamma", "delta", "epsilon"];

/// Errors reading a line list.
#[derive(Debug, thiserror::Error)]
pub enum LineListError {
    /// The embedded TOML could not be parsed.
    #[error("{file}: {message}")]
    Syntax {
        /// File name.
        file: String,
        /// Parser message.
        message: String,
    },
    /// A CSV row is malformed; names the row (1-based, header is row 1) and column.
    #[error("{file}: row {row}, column '{column}': {message}")]
    Row {
        /// File name.
        file: String,
        /// 1-based row number in the file.
        row: usize,
        /// Column name.
        column: String,
        /// What is wrong.
        message: String,
    },
    /// A line refers to something that does not exist.
    #[error("{file}: line '{label}': {message}")]
    Invalid {
        /// File name.
        file: String,
        /// The line's label.
        label: String,
        /// What is wrong.
        message: String,
    },
}

/// Broadening data carried by a line (each `None` means: use the estimate rule).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct BroadeningData {
    /// Radiative damping (FWHM, rad s⁻¹).
    pub gamma_rad: Option<f64>,
    /// log10 quadratic-Stark FWHM per electron at 10⁴ K, rad s⁻¹ cm³.
    pub log_gamma_stark: Option<f64>,
    /// log10 van der Waals FWHM per H atom at 10⁴ K, rad s⁻¹ cm³.
    pub log_gamma_vdw: Option<f64>,
}

/// One spectral line.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Line {
    /// Unique label ("H-alpha", "Ca II K", "He I 5876").
    pub label: String,
    /// Species name ("Ca II").
    pub species: String,
    /// Index of the species in the atomic data (None for species not in the table).
    #[serde(skip)]
    pub species_index: Option<usize>,
    /// Vacuum wavelength, cm.
    pub wavelength_vac: f64,
    /// Air wavelength, cm (above 200 nm).
    pub wavelength_air: Option<f64>,
    /// Lower level energy above the species' ground level, cm⁻¹.
    pub lower_cm: f64,
    /// Upper level energy, cm⁻¹.
    pub upper_cm: f64,
    /// Lower statistical weight.
    pub g_lower: f64,
    /// Upper statistical weight.
    pub g_upper: f64,
    /// log10(g_lower f).
    pub log_gf: f64,
    /// Selection group: the series name for hydrogenic lines, else the family given.
    pub family: String,
    /// Principal quantum numbers (lower, upper) for hydrogen-like lines.
    pub shells: Option<(u32, u32)>,
    /// Broadening data.
    pub broadening: BroadeningData,
    /// Provenance.
    pub source: String,
}

impl Line {
    /// Absorption oscillator strength f_lu.
    pub fn f_value(&self) -> f64 {
        10f64.powf(self.log_gf) / self.g_lower
    }
    /// The customary wavelength (air above 200 nm, vacuum below), cm.
    pub fn wavelength(&self) -> f64 {
        self.wavelength_air.unwrap_or(self.wavelength_vac)
    }
    /// Einstein A of the upper level for this transition, s⁻¹.
    pub fn einstein_a(&self) -> f64 {
        let pi = std::f64::consts::PI;
        let c = crate::constants::C;
        let e = crate::constants::E_CHARGE;
        let lam = self.wavelength_vac;
        8.0 * pi * pi * e * e / (crate::constants::M_E * c * lam * lam) * 10f64.powf(self.log_gf)
            / self.g_upper
    }
}

fn air_of(vac: f64) -> Option<f64> {
    (vac > 2.0e-5).then(|| vacuum_to_air(vac))
}

/// Label of a hydrogen-like line: Greek names for the first five members of the named
/// series of H I ("H-alpha", "Pa-beta"), otherwise "H I 2-9" / "He II 3-4".
pub fn hydrogenic_label(species: &str, n_lo: u32, n_up: u32) -> String {
    if species == "H I" && (1..=6).contains(&n_lo) && n_up - n_lo <= 5 {
        let (_, prefix) = HYDROGEN_SERIES[(n_lo - 1) as usize];
        return format!("{prefix}-{}", GREEK[(n_up - n_lo - 1) as usize]);
    }
    format!("{species} {n_lo}-{n_up}")
}

/// A hydrogen-like line n_lo → n_up of `species` (must be "H I" or "He II").
pub fn hydrogenic_line(data: &AtomicData, species: &str, n_lo: u32, n_up: u32) -> Option<Line> {
    let k = data.species_index(species)?;
    let h = data.species[k].hydrogenic?;
    if n_lo == 0 || n_up <= n_lo {
        return None;
    }
    let vac = h.vacuum_wavelength(n_lo, n_up);
    let f = h.oscillator_strength(n_lo, n_up);
    let g_lo = Hydrogenic::weight(n_lo);
    let family = if species == "H I" && n_lo <= 6 {
        HYDROGEN_SERIES[(n_lo - 1) as usize].0.to_string()
    } else if species == "He II" && n_lo == 4 {
        "Pickering".to_string()
    } else {
        format!("{species} n={n_lo}")
    };
    Some(Line {
        label: hydrogenic_label(species, n_lo, n_up),
        species: species.to_string(),
        species_index: Some(k),
        wavelength_vac: vac,
        wavelength_air: air_of(vac),
        lower_cm: h.excitation_wavenumber(n_lo),
        upper_cm: h.excitation_wavenumber(n_up),
        g_lower: g_lo,
        g_upper: Hydrogenic::weight(n_up),
        log_gf: (g_lo * f).log10(),
        family,
        shells: Some((n_lo, n_up)),
        broadening: BroadeningData::default(),
        source: "computed: hydrogenic levels and Gordon (1929) oscillator strengths".into(),
    })
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLine {
    label: String,
    species: String,
    wavelength_air_nm: Option<f64>,
    wavelength_vac_nm: f64,
    lower_cm: f64,
    upper_cm: f64,
    g_lower: f64,
    g_upper: f64,
    log_gf: f64,
    #[serde(default = "yes")]
    lower_in_table: bool,
    gamma_rad: Option<f64>,
    log_gamma_stark: Option<f64>,
    log_gamma_vdw: Option<f64>,
    family: String,
    source: String,
}

fn yes() -> bool {
    true
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLines {
    line: Vec<RawLine>,
}

/// The line catalogue.
#[derive(Debug, Clone)]
pub struct Catalogue {
    /// All lines, hydrogen-like first.
    pub lines: Vec<Line>,
    by_label: HashMap<String, usize>,
}

/// Highest upper shell generated for hydrogen and He II by default.
pub const DEFAULT_MAX_UPPER: u32 = 30;

impl Catalogue {
    /// The built-in catalogue with hydrogen series (lower 1–6) and He II (lower 2–4) up to
    /// `max_upper`, plus the curated lines.
    pub fn builtin(data: &AtomicData, max_upper: u32) -> Result<Catalogue, LineListError> {
        let mut lines = Vec::new();
        for n_lo in 1..=6 {
            for n_up in n_lo + 1..=max_upper.max(n_lo + 1) {
                lines.extend(hydrogenic_line(data, "H I", n_lo, n_up));
            }
        }
        for n_lo in 2..=4 {
            for n_up in n_lo + 1..=max_upper.max(n_lo + 1) {
                lines.extend(hydrogenic_line(data, "He II", n_lo, n_up));
            }
        }
        lines.extend(curated(data)?);
        Catalogue::from_lines(lines, "built-in catalogue")
    }

    /// The default built-in catalogue (upper shells to [`DEFAULT_MAX_UPPER`]), built once.
    pub fn embedded() -> &'static Catalogue {
        static CAT: OnceLock<Catalogue> = OnceLock::new();
        CAT.get_or_init(|| {
            Catalogue::builtin(AtomicData::embedded(), DEFAULT_MAX_UPPER)
                .expect("the embedded line list is validated by the test suite")
        })
    }

    fn from_lines(lines: Vec<Line>, file: &str) -> Result<Catalogue, LineListError> {
        let mut by_label = HashMap::new();
        for (i, l) in lines.iter().enumerate() {
            if by_label.insert(l.label.clone(), i).is_some() {
                return Err(LineListError::Invalid {
                    file: file.into(),
                    label: l.label.clone(),
                    message: "label used twice".into(),
                });
            }
        }
        Ok(Catalogue { lines, by_label })
    }

    /// Add user lines (their labels must not collide with existing ones).
    pub fn extend(&mut self, more: Vec<Line>, file: &str) -> Result<(), LineListError> {
        let mut all = std::mem::take(&mut self.lines);
        all.extend(more);
        *self = Catalogue::from_lines(all, file)?;
        Ok(())
    }

    /// A line by label (also accepts "H I 2-3" for the hydrogen lines with Greek names).
    pub fn get(&self, label: &str) -> Option<&Line> {
        let label = label.trim();
        if let Some(&i) = self.by_label.get(label) {
            return Some(&self.lines[i]);
        }
        // "H I 2-3" form of a Greek-named line.
        let (sp, rest) = label.rsplit_once(' ')?;
        let (a, b) = rest.split_once('-')?;
        let (a, b) = (a.parse().ok()?, b.parse().ok()?);
        let alias = hydrogenic_label(sp, a, b);
        self.by_label.get(&alias).map(|&i| &self.lines[i])
    }

    /// Lines matching every given criterion (empty criteria match everything).
    pub fn select(&self, sel: &Selection) -> Vec<&Line> {
        self.lines
            .iter()
            .filter(|l| sel.species.is_empty() || sel.species.iter().any(|s| s == &l.species))
            .filter(|l| sel.families.is_empty() || sel.families.iter().any(|f| f == &l.family))
            .filter(|l| {
                let w = l.wavelength();
                sel.min_wavelength.is_none_or(|m| w >= m)
                    && sel.max_wavelength.is_none_or(|m| w <= m)
            })
            .collect()
    }
}

/// Line selection criteria.
#[derive(Debug, Clone, Default)]
pub struct Selection {
    /// Species names.
    pub species: Vec<String>,
    /// Families or series names ("Balmer", "Ca II H&K").
    pub families: Vec<String>,
    /// Shortest customary wavelength, cm.
    pub min_wavelength: Option<f64>,
    /// Longest customary wavelength, cm.
    pub max_wavelength: Option<f64>,
}

fn curated(data: &AtomicData) -> Result<Vec<Line>, LineListError> {
    let file = "embedded line list";
    let raw: RawLines = toml::from_str(LINES_TOML).map_err(|e| LineListError::Syntax {
        file: file.into(),
        message: e.to_string(),
    })?;
    let mut out = Vec::with_capacity(raw.line.len());
    for r in raw.line {
        let invalid = |m: String| LineListError::Invalid {
            file: file.into(),
            label: r.label.clone(),
            message: m,
        };
        if !(r.wavelength_vac_nm > 0.0
            && r.g_lower > 0.0
            && r.g_upper > 0.0
            && r.upper_cm > r.lower_cm)
        {
            return Err(invalid(
                "non-physical wavelength, weights or level order".into(),
            ));
        }
        let species_index = data.species_index(&r.species);
        if species_index.is_none() && r.lower_in_table {
            return Err(invalid(format!(
                "species '{}' is not in the species table",
                r.species
            )));
        }
        let vac = r.wavelength_vac_nm * 1e-7;
        out.push(Line {
            label: r.label.clone(),
            species: r.species.clone(),
            species_index,
            wavelength_vac: vac,
            wavelength_air: r
                .wavelength_air_nm
                .map(|a| a * 1e-7)
                .or_else(|| air_of(vac)),
            lower_cm: r.lower_cm,
            upper_cm: r.upper_cm,
            g_lower: r.g_lower,
            g_upper: r.g_upper,
            log_gf: r.log_gf,
            family: r.family.clone(),
            shells: None,
            broadening: BroadeningData {
                gamma_rad: r.gamma_rad,
                log_gamma_stark: r.log_gamma_stark,
                log_gamma_vdw: r.log_gamma_vdw,
            },
            source: r.source.clone(),
        });
    }
    Ok(out)
}

/// Read user lines from CSV text (format in the module docs). `file` names the source in
/// error messages.
pub fn read_csv(data: &AtomicData, text: &str, file: &str) -> Result<Vec<Line>, LineListError> {
    let mut rows = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'));
    let Some((hrow, header)) = rows.next() else {
        return Err(LineListError::Row {
            file: file.into(),
            row: 1,
            column: "header".into(),
            message: "the file is empty; expected a header row".into(),
        });
    };
    let cols: Vec<String> = header.split(',').map(|c| c.trim().to_string()).collect();
    let known = [
        "label",
        "species",
        "wavelength_vac_nm",
        "wavelength_air_nm",
        "lower_cm",
        "upper_cm",
        "g_lower",
        "g_upper",
        "log_gf",
        "gamma_rad",
        "log_gamma_stark",
        "log_gamma_vdw",
        "family",
        "source",
    ];
    for c in &cols {
        if !known.contains(&c.as_str()) {
            return Err(LineListError::Row {
                file: file.into(),
                row: hrow + 1,
                column: c.clone(),
                message: format!("unknown column; known columns are {}", known.join(", ")),
            });
        }
    }
    for req in [
        "label", "species", "lower_cm", "upper_cm", "g_lower", "g_upper", "log_gf",
    ] {
        if !cols.iter().any(|c| c == req) {
            return Err(LineListError::Row {
                file: file.into(),
                row: hrow + 1,
                column: req.into(),
                message: "required column missing".into(),
            });
        }
    }
    if !cols
        .iter()
        .any(|c| c == "wavelength_vac_nm" || c == "wavelength_air_nm")
    {
        return Err(LineListError::Row {
            file: file.into(),
            row: hrow + 1,
            column: "wavelength_vac_nm".into(),
            message: "give wavelength_vac_nm or wavelength_air_nm".into(),
        });
    }
    let mut out = Vec::new();
    for (i, row) in rows {
        let fields: Vec<&str> = row.split(',').map(str::trim).collect();
        let rown = i + 1;
        let err = |column: &str, message: String| LineListError::Row {
            file: file.into(),
            row: rown,
            column: column.into(),
            message,
        };
        if fields.len() != cols.len() {
            return Err(err(
                "*",
                format!("{} fields, the header has {}", fields.len(), cols.len()),
            ));
        }
        let get = |name: &str| {
            cols.iter()
                .position(|c| c == name)
                .map(|j| fields[j])
                .filter(|s| !s.is_empty())
        };
        let num = |name: &str| -> Result<Option<f64>, LineListError> {
            match get(name) {
                None => Ok(None),
                Some(s) => s
                    .parse::<f64>()
                    .ok()
                    .filter(|v| v.is_finite())
                    .map(Some)
                    .ok_or_else(|| err(name, format!("'{s}' is not a finite number"))),
            }
        };
        let need = |name: &str| num(name)?.ok_or_else(|| err(name, "value missing".into()));
        let label = get("label")
            .ok_or_else(|| err("label", "value missing".into()))?
            .to_string();
        let species = get("species")
            .ok_or_else(|| err("species", "value missing".into()))?
            .to_string();
        let species_index = data
            .species_index(&species)
            .ok_or_else(|| err("species", format!("unknown species '{species}'")))?;
        let (lower_cm, upper_cm) = (need("lower_cm")?, need("upper_cm")?);
        if lower_cm < 0.0 {
            return Err(err("lower_cm", "must be ≥ 0".into()));
        }
        if upper_cm <= lower_cm {
            return Err(err("upper_cm", "must exceed lower_cm".into()));
        }
        let (g_lower, g_upper) = (need("g_lower")?, need("g_upper")?);
        if g_lower <= 0.0 {
            return Err(err("g_lower", "must be positive".into()));
        }
        if g_upper <= 0.0 {
            return Err(err("g_upper", "must be positive".into()));
        }
        let vac = match (num("wavelength_vac_nm")?, num("wavelength_air_nm")?) {
            (Some(v), _) if v > 0.0 => v * 1e-7,
            (None, Some(a)) if a > 200.0 => air_to_vacuum(a * 1e-7),
            (None, Some(_)) => {
                return Err(err(
                    "wavelength_air_nm",
                    "air wavelengths are for λ > 200 nm".into(),
                ));
            }
            _ => {
                return Err(err(
                    "wavelength_vac_nm",
                    "must be a positive number of nm".into(),
                ));
            }
        };
        let gamma_rad = num("gamma_rad")?;
        if gamma_rad.is_some_and(|g| g <= 0.0) {
            return Err(err("gamma_rad", "must be positive".into()));
        }
        out.push(Line {
            label,
            species: species.clone(),
            species_index: Some(species_index),
            wavelength_vac: vac,
            wavelength_air: air_of(vac),
            lower_cm,
            upper_cm,
            g_lower,
            g_upper,
            log_gf: need("log_gf")?,
            family: get("family").unwrap_or(&species).to_string(),
            shells: None,
            broadening: BroadeningData {
                gamma_rad,
                log_gamma_stark: num("log_gamma_stark")?,
                log_gamma_vdw: num("log_gamma_vdw")?,
            },
            source: get("source").map_or_else(|| format!("user line list {file}"), str::to_string),
        });
    }
    Ok(out)
}

/// Vacuum wavelength from an air wavelength (cm), by fixed-point iteration of the Morton
/// (2000) index (converges to 1e-15 in three steps).
pub fn air_to_vacuum(air: f64) -> f64 {
    let mut vac = air;
    for _ in 0..6 {
        vac = air * super::hydrogenic::air_refractive_index(vac);
    }
    vac
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cat() -> &'static Catalogue {
        Catalogue::embedded()
    }

    #[test]
    fn hydrogen_series_are_complete() {
        let c = cat();
        for (n_lo, (series, _)) in HYDROGEN_SERIES.iter().enumerate() {
            let n = c
                .select(&Selection {
                    families: vec![series.to_string()],
                    ..Selection::default()
                })
                .len();
            assert_eq!(
                n,
                (DEFAULT_MAX_UPPER - n_lo as u32 - 1) as usize,
                "{series}"
            );
        }
        let ha = c.get("H-alpha").unwrap();
        assert_eq!(ha.shells, Some((2, 3)));
        assert_eq!(c.get("H I 2-3").unwrap().label, "H-alpha");
        assert!(c.get("H I 2-30").is_some());
        assert!(c.get("He II 3-4").is_some());
        // The catalogue's log gf round-trips the exact f-value.
        let f = Hydrogenic::HYDROGEN.oscillator_strength(2, 3);
        assert!((ha.f_value() / f - 1.0).abs() < 1e-13);
    }

    #[test]
    fn air_wavelengths_of_every_hydrogen_line_follow_rydberg_and_morton() {
        // Issue check: catalogue air wavelengths = Rydberg formula (reduced mass, mean fine
        // structure) converted with the Morton (2000) index — rebuilt here independently from
        // the Rydberg constant and compared to 1e-12 relative.
        let rh =
            crate::constants::RYDBERG_INF / (1.0 + crate::constants::M_E / crate::constants::M_P);
        for l in cat().lines.iter().filter(|l| l.species == "H I") {
            let (a, b) = l.shells.unwrap();
            let bohr = rh * (1.0 / f64::from(a * a) - 1.0 / f64::from(b * b));
            // fine-structure mean shift is < 2e-5 relative: check the Bohr value to that
            assert!(
                (1.0 / l.wavelength_vac / bohr - 1.0).abs() < 2e-5,
                "{}",
                l.label
            );
            if let Some(air) = l.wavelength_air {
                let n = super::super::hydrogenic::air_refractive_index(l.wavelength_vac);
                assert!((air * n / l.wavelength_vac - 1.0).abs() < 1e-14);
                assert!(l.wavelength_vac > 2e-5);
            } else {
                assert!(l.wavelength_vac <= 2e-5);
            }
        }
        let round = air_to_vacuum(vacuum_to_air(656.46e-7));
        assert!((round / 656.46e-7 - 1.0).abs() < 1e-14);
    }

    #[test]
    fn curated_lines_are_present_and_consistent() {
        let c = cat();
        let curated: Vec<&Line> = c.lines.iter().filter(|l| l.shells.is_none()).collect();
        let he1 = curated.iter().filter(|l| l.species == "He I").count();
        let metals = curated.iter().filter(|l| l.species != "He I").count();
        assert!(he1 >= 10, "{he1} He I lines");
        assert!(metals >= 40, "{metals} metal lines");
        for l in &curated {
            // Level energies and wavelength agree (1 cm⁻¹ on the wavenumber).
            let sigma = 1.0 / l.wavelength_vac;
            assert!(
                (l.upper_cm - l.lower_cm - sigma).abs() < 1.5,
                "{}: {} vs {}",
                l.label,
                l.upper_cm - l.lower_cm,
                sigma
            );
            assert!(!l.source.is_empty());
        }
    }

    #[test]
    fn lower_in_table_says_truly_whether_the_lower_level_is_in_the_species_table() {
        // lines.toml header: lower_in_table = true exactly when lower_cm matches a level of the
        // species in species.toml to within 1 cm⁻¹. For the Li I, Sr II and Ba II resonance
        // lines the upper level must be in the table too.
        let d = AtomicData::embedded();
        let raw: RawLines = toml::from_str(LINES_TOML).unwrap();
        let nearest = |levels: &[crate::atoms::Level], e: f64| {
            levels
                .iter()
                .map(|l| (l.energy_cm - e).abs())
                .fold(f64::INFINITY, f64::min)
        };
        let mut with_levels = 0;
        for r in &raw.line {
            let k = d.species_index(&r.species);
            let levels = k.map_or(&[][..], |k| &d.species[k].levels[..]);
            let matched = nearest(levels, r.lower_cm) <= 1.0;
            assert_eq!(
                r.lower_in_table,
                matched,
                "{}: lower_in_table = {} but lower_cm {} is {} cm^-1 from a {} level",
                r.label,
                r.lower_in_table,
                r.lower_cm,
                nearest(levels, r.lower_cm),
                r.species
            );
            if ["Li I", "Sr II", "Ba II"].contains(&r.species.as_str()) {
                assert!(
                    nearest(levels, r.upper_cm) <= 1.0,
                    "{}: upper_cm {} not in the table",
                    r.label,
                    r.upper_cm
                );
                with_levels += 1;
            }
        }
        assert_eq!(with_levels, 6, "two Li I, two Sr II and two Ba II lines");
        // Every curated line now belongs to a species of the table.
        assert!(
            cat().lines.iter().all(|l| l.species_index.is_some()),
            "a catalogue line of a species missing from the table"
        );
    }

    #[test]
    fn user_csv_is_read_and_bad_rows_are_named() {
        let d = AtomicData::embedded();
        let text = "# my lines\nlabel,species,wavelength_air_nm,lower_cm,upper_cm,g_lower,g_upper,log_gf,family\n\
                    Fe I test,Fe I,500.0,0.0,19994.9,9,7,-2.5,test\n";
        let v = read_csv(d, text, "mine.csv").unwrap();
        assert_eq!(v.len(), 1);
        assert!((v[0].wavelength_air.unwrap() - 500e-7).abs() < 1e-15);
        let bad = text.replace("-2.5", "abc");
        let e = read_csv(d, &bad, "mine.csv").unwrap_err().to_string();
        assert!(
            e.contains("row 3") && e.contains("log_gf") && e.contains("mine.csv"),
            "{e}"
        );
        let bad = text.replace("Fe I,", "Xx I,");
        assert!(
            read_csv(d, &bad, "m.csv")
                .unwrap_err()
                .to_string()
                .contains("unknown species")
        );
        let bad = text.replace("family", "colour");
        assert!(
            read_csv(d, &bad, "m.csv")
                .unwrap_err()
                .to_string()
                .contains("unknown column")
        );
        let bad = text.replace(",test\n", "\n");
        assert!(
            read_csv(d, &bad, "m.csv")
                .unwrap_err()
                .to_string()
                .contains("fields")
        );
    }
}
