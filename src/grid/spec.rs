//! The grid specification: a TOML file of our own schema, parsed in two stages — raw TOML
//! (unknown keys refused, syntax errors with line and column) into a validated [`Spec`]
//! whose every parameter is either fixed or an axis.
//!
//! ```toml
//! [grid]
//! title = "Warm and hot dwarfs"
//! output = "demo.h5"          # relative to the spec file's folder
//! compression = 4             # deflate level 0-9
//!
//! [parameters]                # each: a number (fixed) or an axis
//! temperature = { log = [5500.0, 30000.0, 12] }     # start, stop, count (geometric)
//! gas_pressure = { values = [1e3, 1e4, 1e5] }       # one density variable
//! metallicity = { linear = [-1.0, 0.5, 4] }         # start, stop, count (arithmetic)
//! helium_ratio = 0.0851
//! microturbulence = 2.0                              # km/s
//! hydrogen_column = 1e23                             # cm^-2 (or thickness, cm)
//! background_ratio = 1.2                             # T_bg / T (or background_temperature, K, or background = "none")
//! [parameters.offsets]                               # dex per element, fixed or axes
//! Ca = { values = [-0.2, 0.0, 0.2] }
//!
//! [lines]
//! labels = ["H-alpha", "H-beta", "Ca II K"]
//! families = ["Na D"]
//! species = []
//! min_wavelength_nm = 380.0
//! max_wavelength_nm = 700.0
//! line_list = "extra.csv"
//! max_upper = 30
//!
//! [physics]
//! continuum = true
//! cutoff = "occupation-probability"   # or "debye", or "hard" (shells n <= max_shell)
//! max_shell = 30                      # only with cutoff = "hard" (default 30)
//! populations = "lte"                # or "cr": collisional-radiative hydrogen (departure
//!                                     # coefficients stored); then also
//! # cr_levels = 20                    # bundled shells (2-70)
//! # case_b = false                    # Lyman lines thick, no recombination to n = 1
//! # and in [parameters]: dilution = 0.0 (W, fixed or axis), radiation_temperature = 1e4 (K)
//! mu = 1.0                            # measure in intensity at this mu (default: flux)
//! elements = ["H"]                    # restrict the mixture (must include H; default: all)
//! damping = { radiative = 1e8, stark_coefficient = 1e-5 }
//!                                     # replace all broadening rules: Γ = radiative +
//!                                     # stark_coefficient n_e^(2/3) rad/s, plain Voigt
//! ```

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

/// An error in a spec file: names the file, the line and the field, and says how to fix it.
#[derive(Debug, Clone, thiserror::Error)]
#[error("{file}:{line}: {field}: {message}")]
pub struct SpecError {
    /// The spec file.
    pub file: String,
    /// 1-based line number (0 when unknown).
    pub line: usize,
    /// Dotted field name, e.g. `parameters.temperature`.
    pub field: String,
    /// What is wrong and how to fix it.
    pub message: String,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    grid: RawGrid,
    parameters: BTreeMap<String, Spanned<toml::Value>>,
    #[serde(default)]
    lines: RawLines,
    #[serde(default)]
    physics: RawPhysics,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGrid {
    title: String,
    output: String,
    #[serde(default = "default_compression")]
    compression: u8,
}

fn default_compression() -> u8 {
    4
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLines {
    #[serde(default)]
    labels: Vec<String>,
    #[serde(default)]
    families: Vec<String>,
    #[serde(default)]
    species: Vec<String>,
    min_wavelength_nm: Option<f64>,
    max_wavelength_nm: Option<f64>,
    line_list: Option<String>,
    max_upper: Option<u32>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPhysics {
    #[serde(default = "yes")]
    continuum: bool,
    #[serde(default = "default_cutoff")]
    cutoff: String,
    #[serde(default = "default_populations")]
    populations: String,
    mu: Option<f64>,
    max_shell: Option<u32>,
    elements: Option<Vec<String>>,
    damping: Option<RawDamping>,
    cr_levels: Option<u32>,
    #[serde(default)]
    case_b: bool,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDamping {
    radiative: f64,
    stark_coefficient: f64,
}

impl Default for RawPhysics {
    fn default() -> Self {
        RawPhysics {
            continuum: true,
            cutoff: default_cutoff(),
            populations: default_populations(),
            mu: None,
            max_shell: None,
            elements: None,
            damping: None,
            cr_levels: None,
            case_b: false,
        }
    }
}

fn yes() -> bool {
    true
}
fn default_cutoff() -> String {
    "occupation-probability".into()
}
fn default_populations() -> String {
    "lte".into()
}

/// A parameter: fixed, or an axis of explicit, linear or geometric values.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub enum Values {
    /// One value.
    Fixed(f64),
    /// Several values, strictly increasing.
    Axis(Vec<f64>),
}

impl Values {
    /// The values (one for a fixed parameter).
    pub fn values(&self) -> Vec<f64> {
        match self {
            Values::Fixed(v) => vec![*v],
            Values::Axis(v) => v.clone(),
        }
    }
}

/// Physical parameters the spec can set, in storage order of their axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
pub enum ParamKind {
    /// K.
    Temperature,
    /// cm⁻³.
    HydrogenDensity,
    /// dyn cm⁻².
    GasPressure,
    /// cm⁻³.
    ElectronDensity,
    /// dyn cm⁻².
    ElectronPressure,
    /// dex.
    Metallicity,
    /// by number.
    HeliumRatio,
    /// km s⁻¹.
    Microturbulence,
    /// cm.
    Thickness,
    /// cm⁻².
    HydrogenColumn,
    /// K.
    BackgroundTemperature,
    /// T_bg/T.
    BackgroundRatio,
    /// Dilution W of the external radiation field (collisional–radiative populations only).
    Dilution,
    /// K (collisional–radiative populations only).
    RadiationTemperature,
}

impl ParamKind {
    /// The spec key (also the axis name in the grid file).
    pub fn key(&self) -> &'static str {
        match self {
            ParamKind::Temperature => "temperature",
            ParamKind::HydrogenDensity => "hydrogen_density",
            ParamKind::GasPressure => "gas_pressure",
            ParamKind::ElectronDensity => "electron_density",
            ParamKind::ElectronPressure => "electron_pressure",
            ParamKind::Metallicity => "metallicity",
            ParamKind::HeliumRatio => "helium_ratio",
            ParamKind::Microturbulence => "microturbulence",
            ParamKind::Thickness => "thickness",
            ParamKind::HydrogenColumn => "hydrogen_column",
            ParamKind::BackgroundTemperature => "background_temperature",
            ParamKind::BackgroundRatio => "background_ratio",
            ParamKind::Dilution => "dilution",
            ParamKind::RadiationTemperature => "radiation_temperature",
        }
    }

    /// Units, as stored in the grid file.
    pub fn units(&self) -> &'static str {
        match self {
            ParamKind::Temperature
            | ParamKind::BackgroundTemperature
            | ParamKind::RadiationTemperature => "K",
            ParamKind::HydrogenDensity | ParamKind::ElectronDensity => "cm-3",
            ParamKind::GasPressure | ParamKind::ElectronPressure => "dyn cm-2",
            ParamKind::Metallicity => "dex",
            ParamKind::HeliumRatio | ParamKind::BackgroundRatio | ParamKind::Dilution => "1",
            ParamKind::Microturbulence => "km s-1",
            ParamKind::Thickness => "cm",
            ParamKind::HydrogenColumn => "cm-2",
        }
    }

    /// Descriptive name.
    pub fn long_name(&self) -> &'static str {
        match self {
            ParamKind::Temperature => "gas temperature",
            ParamKind::HydrogenDensity => "total hydrogen number density",
            ParamKind::GasPressure => "gas pressure",
            ParamKind::ElectronDensity => "electron number density",
            ParamKind::ElectronPressure => "electron pressure",
            ParamKind::Metallicity => "metallicity [M/H]",
            ParamKind::HeliumRatio => "helium to hydrogen number ratio",
            ParamKind::Microturbulence => "microturbulent velocity",
            ParamKind::Thickness => "slab thickness",
            ParamKind::HydrogenColumn => "hydrogen column density",
            ParamKind::BackgroundTemperature => "background Planck temperature",
            ParamKind::BackgroundRatio => "background to slab temperature ratio",
            ParamKind::Dilution => "dilution factor of the external radiation field",
            ParamKind::RadiationTemperature => "temperature of the external radiation field",
        }
    }

    /// Accepted range (inclusive) and its description.
    fn range(&self) -> (f64, f64, &'static str) {
        match self {
            ParamKind::Temperature => (1e3, 1e6, "between 1000 and 1e6 K"),
            ParamKind::HydrogenDensity | ParamKind::ElectronDensity => {
                (1e-10, 1e30, "a positive density up to 1e30 cm^-3")
            }
            ParamKind::GasPressure | ParamKind::ElectronPressure => {
                (1e-20, 1e20, "a positive pressure up to 1e20 dyn cm^-2")
            }
            ParamKind::Metallicity => (-5.0, 5.0, "between -5 and +5 dex"),
            ParamKind::HeliumRatio => (0.0, 10.0, "between 0 and 10"),
            ParamKind::Microturbulence => (0.0, 1000.0, "between 0 and 1000 km/s"),
            ParamKind::Thickness => (1e-10, 1e30, "a positive thickness in cm"),
            ParamKind::HydrogenColumn => (1e-10, 1e35, "a positive column in cm^-2"),
            ParamKind::BackgroundTemperature => (1.0, 1e7, "between 1 and 1e7 K"),
            ParamKind::BackgroundRatio => (1e-3, 1e3, "between 0.001 and 1000"),
            ParamKind::Dilution => (0.0, 1.0, "between 0 and 1"),
            ParamKind::RadiationTemperature => (1.0, 1e7, "between 1 and 1e7 K"),
        }
    }

    fn from_key(k: &str) -> Option<ParamKind> {
        use ParamKind::*;
        [
            Temperature,
            HydrogenDensity,
            GasPressure,
            ElectronDensity,
            ElectronPressure,
            Metallicity,
            HeliumRatio,
            Microturbulence,
            Thickness,
            HydrogenColumn,
            BackgroundTemperature,
            BackgroundRatio,
            Dilution,
            RadiationTemperature,
        ]
        .into_iter()
        .find(|p| p.key() == k)
    }
}

/// A named parameter with its values.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Parameter {
    /// Axis name ("temperature", "offset_Fe").
    pub name: String,
    /// The kind (`None` for element offsets).
    pub kind: Option<ParamKind>,
    /// Element symbol, for offsets.
    pub element: Option<String>,
    /// Values.
    pub values: Values,
}

impl Parameter {
    /// Units of the parameter.
    pub fn units(&self) -> &'static str {
        self.kind.map_or("dex", |k| k.units())
    }
    /// Descriptive name.
    pub fn long_name(&self) -> String {
        match (&self.kind, &self.element) {
            (Some(k), _) => k.long_name().to_string(),
            (None, Some(e)) => format!("abundance offset of {e}"),
            _ => self.name.clone(),
        }
    }
}

/// Line selection of a spec.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct LineSpec {
    /// Explicit labels.
    pub labels: Vec<String>,
    /// Families or series.
    pub families: Vec<String>,
    /// Species.
    pub species: Vec<String>,
    /// Wavelength window, nm.
    pub min_wavelength_nm: Option<f64>,
    /// Wavelength window, nm.
    pub max_wavelength_nm: Option<f64>,
    /// A user line CSV (resolved relative to the spec file).
    pub line_list: Option<std::path::PathBuf>,
    /// Highest upper shell of generated hydrogen-like series.
    pub max_upper: u32,
}

/// Physics switches.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PhysicsSpec {
    /// Continuum opacity on.
    pub continuum: bool,
    /// Level cut-off: "occupation-probability", "debye" or "hard".
    pub cutoff: String,
    /// Highest hydrogen-like shell counted with `cutoff = "hard"`.
    pub max_shell: Option<u32>,
    /// Populations model: "lte" or "cr" (collisional–radiative hydrogen).
    pub populations: String,
    /// Shells of the collisional–radiative model (with `populations = "cr"`).
    pub cr_levels: Option<u32>,
    /// Case B in the collisional–radiative model.
    pub case_b: bool,
    /// Intensity at μ instead of flux.
    pub mu: Option<f64>,
    /// Only these elements (symbols, must include H); `None`: every element of the table.
    pub elements: Option<Vec<String>>,
    /// A fixed damping law replacing every line's broadening rules.
    pub damping: Option<crate::formation::DampingOverride>,
}

/// A validated grid specification.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Spec {
    /// Title.
    pub title: String,
    /// Output path (resolved relative to the spec file).
    pub output: std::path::PathBuf,
    /// Deflate level.
    pub compression: u8,
    /// Every parameter, fixed or axis, in storage order.
    pub parameters: Vec<Parameter>,
    /// Which background: `None` means no background (emission).
    pub has_background: bool,
    /// Lines.
    pub lines: LineSpec,
    /// Physics.
    pub physics: PhysicsSpec,
    /// The spec text as given.
    pub text: String,
}

/// 1-based line number of a byte offset in a text.
fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())]
        .bytes()
        .filter(|&b| b == b'\n')
        .count()
        + 1
}

/// The dotted field at a line: the nearest `[section]` header above it and the key before
/// `=` on the line (for type errors, which carry a span but no key path).
fn field_at(text: &str, line: usize) -> String {
    let lines: Vec<&str> = text.lines().collect();
    if line == 0 || line > lines.len() {
        return "syntax".into();
    }
    let key = lines[line - 1].split('=').next().unwrap_or("").trim();
    let section = lines[..line]
        .iter()
        .rev()
        .map(|l| l.trim())
        .find(|l| l.starts_with('['))
        .map(|l| l.trim_matches(|c| c == '[' || c == ']').to_string());
    match (section, key.is_empty() || key.starts_with('[')) {
        (Some(s), false) => format!("{s}.{key}"),
        (Some(s), true) => s,
        (None, false) => key.to_string(),
        (None, true) => "syntax".into(),
    }
}

/// Line of a `[section]` header (0 if absent).
fn line_of_header(text: &str, header: &str) -> usize {
    text.lines()
        .position(|l| l.trim() == header)
        .map_or(0, |i| i + 1)
}

/// Line of the first occurrence of `key =` at the start of a line, for errors in sections
/// that carry no spans.
fn line_of_key(text: &str, key: &str) -> usize {
    text.lines()
        .position(|l| {
            let t = l.trim_start();
            t.starts_with(key) && t[key.len()..].trim_start().starts_with('=')
        })
        .map_or(0, |i| i + 1)
}

impl Spec {
    /// Parse and validate a spec text; `file` names it in errors, `base` is the folder that
    /// relative paths are resolved against.
    pub fn parse(text: &str, file: &str, base: &std::path::Path) -> Result<Spec, SpecError> {
        let err = |line: usize, field: &str, message: String| SpecError {
            file: file.to_string(),
            line,
            field: field.to_string(),
            message,
        };
        let raw: RawSpec = toml::from_str(text).map_err(|e| {
            let line = e.span().map_or(0, |s| line_of(text, s.start));
            let msg = e.message().to_string();
            let field = if msg.contains("missing field") {
                "spec".to_string()
            } else if msg.contains("invalid type") || msg.contains("unknown field") {
                field_at(text, line)
            } else {
                "syntax".to_string()
            };
            err(
                line,
                &field,
                format!("{msg} (see the spec reference in the README)"),
            )
        })?;
        if raw.grid.compression > 9 {
            return Err(err(
                line_of_key(text, "compression"),
                "grid.compression",
                "the deflate level must be 0 to 9".into(),
            ));
        }
        if raw.grid.output.trim().is_empty() {
            return Err(err(
                line_of_key(text, "output"),
                "grid.output",
                "give an output file name, e.g. \"grid.h5\"".into(),
            ));
        }
        let mut params: Vec<Parameter> = Vec::new();
        let mut has_background = true;
        for (key, value) in &raw.parameters {
            let line = line_of(text, value.span().start);
            let field = format!("parameters.{key}");
            if key == "offsets" {
                let toml::Value::Table(t) = value.get_ref() else {
                    return Err(err(line, &field, "offsets must be a table of element = dex, e.g. [parameters.offsets] Fe = 0.2".into()));
                };
                for (el, v) in t {
                    let f = format!("parameters.offsets.{el}");
                    let vals = parse_values(v, &f)
                        .map_err(|m| err(line_of_key(text, el).max(line), &f, m))?;
                    for x in vals.values() {
                        if !(-5.0..=5.0).contains(&x) {
                            return Err(err(
                                line_of_key(text, el).max(line),
                                &f,
                                format!(
                                    "{x} is out of range: offsets must be between -5 and +5 dex"
                                ),
                            ));
                        }
                    }
                    params.push(Parameter {
                        name: format!("offset_{el}"),
                        kind: None,
                        element: Some(el.clone()),
                        values: vals,
                    });
                }
                continue;
            }
            if key == "background" {
                match value.get_ref() {
                    toml::Value::String(s) if s == "none" => {
                        has_background = false;
                        continue;
                    }
                    _ => {
                        return Err(err(line, &field, "the only value is \"none\" (no background); for a Planck background give background_temperature or background_ratio".into()));
                    }
                }
            }
            let Some(kind) = ParamKind::from_key(key) else {
                return Err(err(
                    line,
                    &field,
                    "unknown parameter; known: temperature, hydrogen_density, gas_pressure, electron_density, electron_pressure, metallicity, helium_ratio, microturbulence, thickness, hydrogen_column, background_temperature, background_ratio, background, dilution, radiation_temperature, offsets".into(),
                ));
            };
            let vals = parse_values(value.get_ref(), &field).map_err(|m| err(line, &field, m))?;
            let (lo, hi, what) = kind.range();
            for x in vals.values() {
                if !(x.is_finite() && x >= lo && x <= hi) {
                    return Err(err(
                        line,
                        &field,
                        format!("{x} is out of range: must be {what}"),
                    ));
                }
            }
            params.push(Parameter {
                name: key.clone(),
                kind: Some(kind),
                element: None,
                values: vals,
            });
        }
        let count = |kinds: &[ParamKind]| {
            params
                .iter()
                .filter(|p| p.kind.is_some_and(|k| kinds.contains(&k)))
                .count()
        };
        use ParamKind::*;
        let params_line = line_of_header(text, "[parameters]");
        if count(&[Temperature]) != 1 {
            return Err(err(
                params_line,
                "parameters.temperature",
                "temperature is required, e.g. temperature = { log = [5000.0, 20000.0, 16] }"
                    .into(),
            ));
        }
        let dens = [
            HydrogenDensity,
            GasPressure,
            ElectronDensity,
            ElectronPressure,
        ];
        if count(&dens) != 1 {
            return Err(err(
                params_line,
                "parameters",
                "give exactly one density variable: hydrogen_density, gas_pressure, electron_density or electron_pressure".into(),
            ));
        }
        if count(&[Thickness, HydrogenColumn]) != 1 {
            return Err(err(
                params_line,
                "parameters",
                "give exactly one of thickness (cm) or hydrogen_column (cm^-2)".into(),
            ));
        }
        let bg = count(&[BackgroundTemperature, BackgroundRatio]);
        if has_background && bg != 1 {
            return Err(err(
                params_line,
                "parameters",
                "give exactly one of background_temperature (K), background_ratio (T_bg/T) or background = \"none\"".into(),
            ));
        }
        if !has_background && bg != 0 {
            return Err(err(
                line_of_key(text, "background"),
                "parameters.background",
                "background = \"none\" conflicts with a background temperature or ratio".into(),
            ));
        }
        let (no_micro, no_metal) = (count(&[Microturbulence]) == 0, count(&[Metallicity]) == 0);
        if no_micro {
            params.push(Parameter {
                name: "microturbulence".into(),
                kind: Some(Microturbulence),
                element: None,
                values: Values::Fixed(2.0),
            });
        }
        if no_metal {
            params.push(Parameter {
                name: "metallicity".into(),
                kind: Some(Metallicity),
                element: None,
                values: Values::Fixed(0.0),
            });
        }
        // Storage order: the kinds in enum order, then offsets by element symbol.
        params.sort_by(|a, b| match (a.kind, b.kind) {
            (Some(x), Some(y)) => x.cmp(&y),
            (Some(_), None) => std::cmp::Ordering::Less,
            (None, Some(_)) => std::cmp::Ordering::Greater,
            (None, None) => a.name.cmp(&b.name),
        });
        let l = raw.lines;
        for (k, v) in [
            ("min_wavelength_nm", l.min_wavelength_nm),
            ("max_wavelength_nm", l.max_wavelength_nm),
        ] {
            if let Some(v) = v
                && !(v.is_finite() && v > 0.0)
            {
                return Err(err(
                    line_of_key(text, k),
                    &format!("lines.{k}"),
                    "must be a positive number of nm".into(),
                ));
            }
        }
        if let (Some(a), Some(b)) = (l.min_wavelength_nm, l.max_wavelength_nm)
            && a >= b
        {
            return Err(err(
                line_of_key(text, "max_wavelength_nm"),
                "lines.max_wavelength_nm",
                format!("{b} must exceed min_wavelength_nm = {a}"),
            ));
        }
        let max_upper = l
            .max_upper
            .unwrap_or(crate::atoms::lines::DEFAULT_MAX_UPPER);
        if !(3..=100).contains(&max_upper) {
            return Err(err(
                line_of_key(text, "max_upper"),
                "lines.max_upper",
                "must be between 3 and 100".into(),
            ));
        }
        let p = raw.physics;
        if !["occupation-probability", "debye", "hard"].contains(&p.cutoff.as_str()) {
            return Err(err(
                line_of_key(text, "cutoff"),
                "physics.cutoff",
                format!(
                    "'{}': use \"occupation-probability\", \"debye\" or \"hard\"",
                    p.cutoff
                ),
            ));
        }
        let max_shell = match (p.cutoff.as_str(), p.max_shell) {
            ("hard", m) => {
                let m = m.unwrap_or(30);
                if !(2..=crate::eos::partition::MAX_SHELL).contains(&m) {
                    return Err(err(
                        line_of_key(text, "max_shell"),
                        "physics.max_shell",
                        format!(
                            "{m}: must be between 2 and {}",
                            crate::eos::partition::MAX_SHELL
                        ),
                    ));
                }
                Some(m)
            }
            (_, Some(_)) => {
                return Err(err(
                    line_of_key(text, "max_shell"),
                    "physics.max_shell",
                    "max_shell applies only with cutoff = \"hard\"".into(),
                ));
            }
            (_, None) => None,
        };
        if let Some(els) = &p.elements
            && !els.iter().any(|e| e == "H")
        {
            return Err(err(
                line_of_key(text, "elements"),
                "physics.elements",
                "the element list must include H, e.g. elements = [\"H\", \"He\"]".into(),
            ));
        }
        if let Some(d) = p.damping {
            for (k, v) in [
                ("radiative", d.radiative),
                ("stark_coefficient", d.stark_coefficient),
            ] {
                if !(v.is_finite() && v >= 0.0) {
                    return Err(err(
                        line_of_key(text, "damping"),
                        &format!("physics.damping.{k}"),
                        format!("{v}: must be a finite number >= 0 (rad/s)"),
                    ));
                }
            }
        }
        if !["lte", "cr"].contains(&p.populations.as_str()) {
            return Err(err(
                line_of_key(text, "populations"),
                "physics.populations",
                format!(
                    "'{}': use \"lte\" or \"cr\" (collisional-radiative hydrogen)",
                    p.populations
                ),
            ));
        }
        let cr = p.populations == "cr";
        let cr_levels = match (cr, p.cr_levels) {
            (true, m) => {
                let m = m.unwrap_or(crate::nlte::DEFAULT_LEVELS);
                if !(2..=crate::nlte::MAX_LEVELS).contains(&m) {
                    return Err(err(
                        line_of_key(text, "cr_levels"),
                        "physics.cr_levels",
                        format!("{m}: must be between 2 and {}", crate::nlte::MAX_LEVELS),
                    ));
                }
                Some(m)
            }
            (false, Some(_)) => {
                return Err(err(
                    line_of_key(text, "cr_levels"),
                    "physics.cr_levels",
                    "cr_levels applies only with populations = \"cr\"".into(),
                ));
            }
            (false, None) => None,
        };
        if p.case_b && !cr {
            return Err(err(
                line_of_key(text, "case_b"),
                "physics.case_b",
                "case_b applies only with populations = \"cr\"".into(),
            ));
        }
        if !cr && count_kinds(&params, &[Dilution, RadiationTemperature]) > 0 {
            let key = if count_kinds(&params, &[Dilution]) > 0 {
                "dilution"
            } else {
                "radiation_temperature"
            };
            return Err(err(
                line_of_key(text, key),
                &format!("parameters.{key}"),
                "the external radiation field applies only with populations = \"cr\" in [physics]"
                    .into(),
            ));
        }
        if cr
            && count_kinds(&params, &[Dilution]) == 1
            && count_kinds(&params, &[RadiationTemperature]) == 0
        {
            let w_positive = params
                .iter()
                .find(|p| p.kind == Some(Dilution))
                .is_some_and(|p| p.values.values().iter().any(|&w| w > 0.0));
            if w_positive {
                return Err(err(
                    line_of_key(text, "dilution"),
                    "parameters.dilution",
                    "a dilution above 0 needs radiation_temperature (K) as well".into(),
                ));
            }
        }
        if let Some(mu) = p.mu
            && !(mu > 0.0 && mu <= 1.0)
        {
            return Err(err(
                line_of_key(text, "mu"),
                "physics.mu",
                format!("{mu}: the direction cosine must lie in (0, 1]"),
            ));
        }
        Ok(Spec {
            title: raw.grid.title,
            output: base.join(&raw.grid.output),
            compression: raw.grid.compression,
            parameters: params,
            has_background,
            lines: LineSpec {
                labels: l.labels,
                families: l.families,
                species: l.species,
                min_wavelength_nm: l.min_wavelength_nm,
                max_wavelength_nm: l.max_wavelength_nm,
                line_list: l.line_list.map(|p| base.join(p)),
                max_upper,
            },
            physics: PhysicsSpec {
                continuum: p.continuum,
                cutoff: p.cutoff,
                max_shell,
                populations: p.populations,
                cr_levels,
                case_b: p.case_b,
                mu: p.mu,
                elements: p.elements,
                damping: p.damping.map(|d| crate::formation::DampingOverride {
                    radiative: d.radiative,
                    stark_coefficient: d.stark_coefficient,
                }),
            },
            text: text.to_string(),
        })
    }

    /// The parameters that are axes (more than one value), in storage order.
    pub fn axes(&self) -> Vec<&Parameter> {
        self.parameters
            .iter()
            .filter(|p| matches!(p.values, Values::Axis(_)))
            .collect()
    }

    /// Total number of grid points.
    pub fn point_count(&self) -> usize {
        self.axes()
            .iter()
            .map(|p| p.values.values().len())
            .product()
    }

    /// Digest of the spec text (FNV-1a 64, hex).
    pub fn digest(&self) -> String {
        crate::atoms::fnv1a_hex(&self.text)
    }
}

/// Number of parameters of the given kinds.
fn count_kinds(params: &[Parameter], kinds: &[ParamKind]) -> usize {
    params
        .iter()
        .filter(|p| p.kind.is_some_and(|k| kinds.contains(&k)))
        .count()
}

/// Parse a parameter value: a number, `{ values = [...] }`, `{ linear = [a, b, n] }` or
/// `{ log = [a, b, n] }`.
fn parse_values(v: &toml::Value, field: &str) -> Result<Values, String> {
    let num = |x: &toml::Value| match x {
        toml::Value::Float(f) => Some(*f),
        toml::Value::Integer(i) => Some(*i as f64),
        _ => None,
    };
    if let Some(x) = num(v) {
        return Ok(Values::Fixed(x));
    }
    let toml::Value::Table(t) = v else {
        return Err(format!(
            "expected a number or a table such as {{ values = [...] }}, {{ linear = [start, stop, count] }} or {{ log = [start, stop, count] }} (in {field})"
        ));
    };
    if t.len() != 1 {
        return Err("give exactly one of values, linear or log".into());
    }
    let (k, inner) = t.iter().next().expect("one entry");
    let toml::Value::Array(arr) = inner else {
        return Err(format!("'{k}' must be an array"));
    };
    let xs: Vec<f64> = arr
        .iter()
        .map(|x| num(x).ok_or_else(|| format!("'{k}' must hold numbers only")))
        .collect::<Result<_, _>>()?;
    let out = match k.as_str() {
        "values" => {
            if xs.is_empty() {
                return Err("the axis is empty: give at least one value".into());
            }
            xs
        }
        "linear" | "log" => {
            if xs.len() != 3 {
                return Err(format!("'{k}' takes [start, stop, count]"));
            }
            let n = xs[2];
            if !(n >= 1.0 && n.fract() == 0.0 && n <= 1e7) {
                return Err(format!(
                    "count must be a whole number from 1 to 1e7, got {n}"
                ));
            }
            let n = n as usize;
            let (a, b) = (xs[0], xs[1]);
            if !(a.is_finite() && b.is_finite()) {
                return Err("start and stop must be finite".into());
            }
            if n > 1 && b <= a {
                return Err(format!(
                    "the range is reversed or empty: stop {b} must exceed start {a}"
                ));
            }
            if k == "log" && a <= 0.0 {
                return Err("a log range needs a positive start".into());
            }
            (0..n)
                .map(|i| {
                    if n == 1 {
                        return a;
                    }
                    let t = i as f64 / (n - 1) as f64;
                    let v = if k == "log" {
                        a * (b / a).powf(t)
                    } else {
                        a + (b - a) * t
                    };
                    // land exactly on the end points
                    if i == n - 1 { b } else { v }
                })
                .collect()
        }
        other => {
            return Err(format!(
                "unknown axis form '{other}': use values, linear or log"
            ));
        }
    };
    if out.iter().any(|x| !x.is_finite()) {
        return Err("values must be finite".into());
    }
    for w in out.windows(2) {
        if w[1] <= w[0] {
            return Err(format!(
                "axis values must be strictly increasing ({} then {})",
                w[0], w[1]
            ));
        }
    }
    Ok(if out.len() == 1 {
        Values::Fixed(out[0])
    } else {
        Values::Axis(out)
    })
}
