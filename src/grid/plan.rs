//! The plan: a validated spec turned into inspectable data — axes in storage order, fixed
//! parameters, the resolved line list, the point ↔ index map, the pencils (all points along
//! the last axis with the other indices fixed; the unit of work and of writing) and shards.

use crate::atoms::AtomicData;
use crate::atoms::lines::{Catalogue, Line, Selection, read_csv};
use crate::eos::occupation::LevelCutoff;
use crate::eos::{Composition, Density, EosOptions, StateRequest};
use crate::formation::departures::CrSettings;
use crate::formation::{Background, Geometry, SlabOptions, View};
use crate::nlte::RadiationField;

use super::spec::{ParamKind, Parameter, Spec, SpecError, Values};

/// One shard of a plan: pencils `index·n/count .. (index+1)·n/count` (contiguous).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct Shard {
    /// 0-based shard index.
    pub index: usize,
    /// Number of shards.
    pub count: usize,
}

/// A plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The spec.
    pub spec: Spec,
    /// Axes (parameters with several values), storage order.
    pub axes: Vec<Parameter>,
    /// Fixed parameters.
    pub fixed: Vec<Parameter>,
    /// Lines, in catalogue order of selection.
    pub lines: Vec<Line>,
    /// Shape of the point grid (empty for a single point).
    pub shape: Vec<usize>,
}

/// The physical inputs of one grid point.
#[derive(Debug, Clone, PartialEq)]
pub struct PointInputs {
    /// State request.
    pub state: StateRequest,
    /// Slab options.
    pub slab: SlabOptions,
    /// Collisional–radiative hydrogen populations (`None`: LTE).
    pub populations: Option<CrSettings>,
}

impl Plan {
    /// Build the plan of a spec with the built-in catalogue (plus the spec's line list).
    pub fn new(spec: Spec) -> Result<Plan, SpecError> {
        let err = |field: &str, message: String| {
            // Point at the section the field belongs to.
            let section = field.split('.').next().unwrap_or("");
            let header = if field.starts_with("parameters.offsets") {
                "[parameters.offsets]".to_string()
            } else {
                format!("[{section}]")
            };
            let line = spec
                .text
                .lines()
                .position(|l| l.trim() == header)
                .map_or(0, |i| i + 1);
            SpecError {
                file: String::new(),
                line,
                field: field.to_string(),
                message,
            }
        };
        let data = AtomicData::embedded();
        let mut cat = if spec.lines.max_upper == crate::atoms::lines::DEFAULT_MAX_UPPER {
            Catalogue::embedded().clone()
        } else {
            Catalogue::builtin(data, spec.lines.max_upper)
                .map_err(|e| err("lines", e.to_string()))?
        };
        if let Some(p) = &spec.lines.line_list {
            let text = std::fs::read_to_string(p)
                .map_err(|e| err("lines.line_list", format!("{}: {e}", p.display())))?;
            let more = read_csv(data, &text, &p.display().to_string())
                .map_err(|e| err("lines.line_list", e.to_string()))?;
            cat.extend(more, &p.display().to_string())
                .map_err(|e| err("lines.line_list", e.to_string()))?;
        }
        let mut lines: Vec<Line> = Vec::new();
        for l in &spec.lines.labels {
            let line = cat.get(l).ok_or_else(|| {
                err(
                    "lines.labels",
                    format!("unknown line label '{l}' (list them with `linegrid lines`)"),
                )
            })?;
            lines.push(line.clone());
        }
        let filtered = !spec.lines.families.is_empty()
            || !spec.lines.species.is_empty()
            || spec.lines.min_wavelength_nm.is_some()
            || spec.lines.max_wavelength_nm.is_some();
        if filtered {
            let sel = Selection {
                species: spec.lines.species.clone(),
                families: spec.lines.families.clone(),
                min_wavelength: spec.lines.min_wavelength_nm.map(|v| v * 1e-7),
                max_wavelength: spec.lines.max_wavelength_nm.map(|v| v * 1e-7),
            };
            for l in cat.select(&sel) {
                if !lines.iter().any(|x| x.label == l.label) {
                    lines.push(l.clone());
                }
            }
        }
        if lines.is_empty() {
            return Err(err(
                "lines",
                "no lines selected: give labels, families, species or a wavelength window".into(),
            ));
        }
        for l in &lines {
            if l.species_index.is_none() {
                return Err(err(
                    "lines",
                    format!(
                        "line '{}' belongs to '{}', which is not in the species table",
                        l.label, l.species
                    ),
                ));
            }
        }
        // A restricted mixture must name known elements and keep every line's element.
        if let Some(els) = &spec.physics.elements {
            for el in els {
                if data.element_index(el).is_none() {
                    return Err(err("physics.elements", format!("unknown element '{el}'")));
                }
            }
            for l in &lines {
                let k = l.species_index.expect("checked above");
                let el = &data.elements[data.species[k].element].symbol;
                if !els.contains(el) {
                    return Err(err(
                        "physics.elements",
                        format!(
                            "line '{}' needs element '{el}', which the element list leaves out",
                            l.label
                        ),
                    ));
                }
            }
        }
        // Element offsets must name known elements.
        for p in &spec.parameters {
            if let Some(el) = &p.element
                && data.element_index(el).is_none()
            {
                return Err(err(
                    &format!("parameters.offsets.{el}"),
                    format!("unknown element '{el}'"),
                ));
            }
        }
        let axes: Vec<Parameter> = spec.axes().into_iter().cloned().collect();
        let fixed: Vec<Parameter> = spec
            .parameters
            .iter()
            .filter(|p| matches!(p.values, Values::Fixed(_)))
            .cloned()
            .collect();
        let shape = axes.iter().map(|a| a.values.values().len()).collect();
        Ok(Plan {
            spec,
            axes,
            fixed,
            lines,
            shape,
        })
    }

    /// Number of points.
    pub fn point_count(&self) -> usize {
        self.shape.iter().product()
    }

    /// Points per pencil (the length of the last axis; 1 without axes).
    pub fn pencil_len(&self) -> usize {
        self.shape.last().copied().unwrap_or(1)
    }

    /// Number of pencils.
    pub fn pencil_count(&self) -> usize {
        self.point_count() / self.pencil_len()
    }

    /// Pencils belonging to a shard.
    pub fn shard_pencils(&self, shard: Option<Shard>) -> std::ops::Range<usize> {
        let n = self.pencil_count();
        match shard {
            None => 0..n,
            Some(s) => (s.index * n / s.count)..((s.index + 1) * n / s.count),
        }
    }

    /// Axis indices of a flat point index (row-major, last axis fastest).
    pub fn unravel(&self, mut flat: usize) -> Vec<usize> {
        let mut idx = vec![0; self.shape.len()];
        for (i, &n) in self.shape.iter().enumerate().rev() {
            idx[i] = flat % n;
            flat /= n;
        }
        idx
    }

    /// The value of every parameter at a point given by its axis values.
    fn value(&self, kind: ParamKind, axis_values: &[f64]) -> Option<f64> {
        if let Some(i) = self.axes.iter().position(|a| a.kind == Some(kind)) {
            return Some(axis_values[i]);
        }
        self.fixed
            .iter()
            .find(|p| p.kind == Some(kind))
            .map(|p| p.values.values()[0])
    }

    /// Physical inputs of the point with flat index `flat`.
    pub fn point(&self, flat: usize) -> PointInputs {
        let idx = self.unravel(flat);
        let values: Vec<f64> = self
            .axes
            .iter()
            .zip(&idx)
            .map(|(a, &i)| a.values.values()[i])
            .collect();
        self.inputs_at(&values)
    }

    /// Physical inputs at arbitrary axis values (one per axis, storage order; the fixed
    /// parameters as in the spec). At node values this is exactly [`Plan::point`].
    pub fn inputs_at(&self, values: &[f64]) -> PointInputs {
        assert_eq!(values.len(), self.axes.len(), "one value per axis");
        let v = |k| self.value(k, values);
        let t = v(ParamKind::Temperature).expect("validated: temperature present");
        let density = if let Some(x) = v(ParamKind::HydrogenDensity) {
            Density::HydrogenDensity(x)
        } else if let Some(x) = v(ParamKind::GasPressure) {
            Density::GasPressure(x)
        } else if let Some(x) = v(ParamKind::ElectronDensity) {
            Density::ElectronDensity(x)
        } else {
            Density::ElectronPressure(
                v(ParamKind::ElectronPressure).expect("validated: one density"),
            )
        };
        let mut offsets = Vec::new();
        for (i, a) in self.axes.iter().enumerate() {
            if let Some(el) = &a.element {
                offsets.push((el.clone(), values[i]));
            }
        }
        for p in &self.fixed {
            if let Some(el) = &p.element {
                offsets.push((el.clone(), p.values.values()[0]));
            }
        }
        let composition = Composition {
            metallicity: v(ParamKind::Metallicity).unwrap_or(0.0),
            helium_ratio: v(ParamKind::HeliumRatio),
            offsets,
            elements: self.spec.physics.elements.clone(),
        };
        let cutoff = match (
            self.spec.physics.cutoff.as_str(),
            self.spec.physics.max_shell,
        ) {
            ("debye", _) => LevelCutoff::Debye,
            ("hard", Some(m)) => LevelCutoff::MaxShell(m),
            _ => LevelCutoff::OccupationProbability,
        };
        let geometry = match (v(ParamKind::Thickness), v(ParamKind::HydrogenColumn)) {
            (Some(l), _) => Geometry::Thickness(l),
            (_, Some(n)) => Geometry::HydrogenColumn(n),
            _ => unreachable!("validated: one of thickness or column"),
        };
        let background = if !self.spec.has_background {
            Background::None
        } else if let Some(tb) = v(ParamKind::BackgroundTemperature) {
            Background::Planck(tb)
        } else {
            Background::Planck(t * v(ParamKind::BackgroundRatio).expect("validated: background"))
        };
        PointInputs {
            state: StateRequest {
                temperature: t,
                density,
                composition,
                options: EosOptions {
                    cutoff,
                    hydrogen_levels: 30,
                },
            },
            slab: SlabOptions {
                geometry,
                background,
                microturbulence: v(ParamKind::Microturbulence).unwrap_or(2.0) * 1e5,
                view: self.spec.physics.mu.map_or(View::Flux, View::Intensity),
                continuum: self.spec.physics.continuum,
                damping: self.spec.physics.damping,
            },
            populations: self.spec.physics.cr_levels.map(|levels| CrSettings {
                levels,
                field: RadiationField {
                    dilution: v(ParamKind::Dilution).unwrap_or(0.0),
                    temperature: v(ParamKind::RadiationTemperature).unwrap_or(1.0e4),
                },
                case_b: self.spec.physics.case_b,
            }),
        }
    }

    /// Estimated file size in bytes (uncompressed data of every dataset).
    pub fn estimated_bytes(&self, per_line_datasets: usize, per_point_datasets: usize) -> usize {
        self.point_count() * (8 * (per_line_datasets * self.lines.len() + per_point_datasets) + 1)
    }
}
