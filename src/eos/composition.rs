//! Chemical composition: the reference mix of Asplund, Grevesse, Sauval & Scott (2009, ARA&A
//! 47, 481, Table 1, photospheric values, carried in the species table), scaled by a
//! metallicity [M/H] (every element heavier than He), a He/H number ratio, per-element
//! offsets (dex), and an optional subset of elements.

use crate::atoms::AtomicData;
use crate::error::{Error, Result};

/// Accepted range of [M/H] and of per-element offsets, dex.
pub const METALLICITY_RANGE: (f64, f64) = (-5.0, 5.0);

/// A composition specification, validated by [`Composition::abundances`].
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Composition {
    /// [M/H], dex: added to log ε of every element heavier than helium.
    pub metallicity: f64,
    /// He/H by number; `None` keeps the reference value (10^(10.93−12) = 0.0851).
    pub helium_ratio: Option<f64>,
    /// Extra offsets in dex per element symbol, applied after [M/H].
    pub offsets: Vec<(String, f64)>,
    /// Only these elements (symbols); `None` means every element in the table. Must contain H.
    pub elements: Option<Vec<String>>,
}

impl Default for Composition {
    fn default() -> Self {
        Composition {
            metallicity: 0.0,
            helium_ratio: None,
            offsets: Vec::new(),
            elements: None,
        }
    }
}

impl Composition {
    /// Pure hydrogen (textbook cases).
    pub fn pure_hydrogen() -> Composition {
        Composition {
            elements: Some(vec!["H".to_string()]),
            ..Composition::default()
        }
    }

    /// Number abundance of every element of `data` relative to hydrogen (0 for excluded
    /// elements), validating the specification.
    pub fn abundances(&self, data: &AtomicData) -> Result<Vec<f64>> {
        let (lo, hi) = METALLICITY_RANGE;
        if !(self.metallicity.is_finite() && (lo..=hi).contains(&self.metallicity)) {
            return Err(Error::invalid(
                "--metallicity",
                self.metallicity,
                "[M/H] must be a finite number of dex between -5 and +5",
            ));
        }
        if let Some(r) = self.helium_ratio
            && !(r.is_finite() && (0.0..=10.0).contains(&r))
        {
            return Err(Error::invalid(
                "--helium-ratio",
                r,
                "He/H by number must be a finite number between 0 and 10",
            ));
        }
        let known = || {
            data.elements
                .iter()
                .map(|e| e.symbol.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };
        let lookup = |sym: &str, field: &str| {
            data.element_index(sym).ok_or_else(|| Error::UnknownName {
                kind: "element",
                name: sym.to_string(),
                field: field.to_string(),
                known: known(),
            })
        };
        let mut include = vec![self.elements.is_none(); data.elements.len()];
        if let Some(list) = &self.elements {
            for s in list {
                include[lookup(s, "--elements")?] = true;
            }
            if !include[lookup("H", "--elements")?] {
                return Err(Error::invalid(
                    "--elements",
                    list.join(","),
                    "the element list must contain H (densities are per hydrogen nucleus)",
                ));
            }
        }
        let mut offsets = vec![0.0; data.elements.len()];
        for (s, d) in &self.offsets {
            let i = lookup(s, "--offset")?;
            if !(d.is_finite() && (lo..=hi).contains(d)) {
                return Err(Error::invalid(
                    "--offset",
                    format!("{s}={d}"),
                    "element offsets must be finite numbers of dex between -5 and +5",
                ));
            }
            offsets[i] += d;
        }
        Ok(data
            .elements
            .iter()
            .enumerate()
            .map(|(i, e)| {
                if !include[i] {
                    return 0.0;
                }
                let base = match (e.z, self.helium_ratio) {
                    (1, _) => return 1.0,
                    (2, Some(r)) => r.log10(),
                    (2, None) => e.log_eps - 12.0,
                    _ => e.log_eps - 12.0 + self.metallicity,
                };
                10f64.powf(base + offsets[i])
            })
            .collect())
    }
}

/// Mass fractions (X, Y, Z) of hydrogen, helium and everything heavier for given abundances.
pub fn mass_fractions(data: &AtomicData, abundances: &[f64]) -> (f64, f64, f64) {
    let mut parts = [0.0; 3];
    for (e, a) in data.elements.iter().zip(abundances) {
        let slot = match e.z {
            1 => 0,
            2 => 1,
            _ => 2,
        };
        parts[slot] += a * e.mass_amu;
    }
    let total: f64 = parts.iter().sum();
    (parts[0] / total, parts[1] / total, parts[2] / total)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reference_mix_mass_fractions() {
        // Asplund et al. 2009, ARA&A 47, 481, Table 4 (present-day photosphere):
        // X = 0.7381, Y = 0.2485, Z = 0.0134. Our table has 21 elements, not all 83, so Z
        // comes out a few per cent low; tolerance 0.002 absolute on X and Y, 0.0015 on Z.
        let d = AtomicData::embedded();
        let a = Composition::default().abundances(d).unwrap();
        let (x, y, z) = mass_fractions(d, &a);
        assert!((x - 0.7381).abs() < 0.002, "X = {x}");
        assert!((y - 0.2485).abs() < 0.002, "Y = {y}");
        assert!((z - 0.0134).abs() < 0.0015, "Z = {z}");
        // Common practice, no source: hydrogen is ~90% of atoms and ~70% of the mass.
        let n_total: f64 = a.iter().sum();
        assert!((1.0 / n_total - 0.92).abs() < 0.03);
    }

    #[test]
    fn metallicity_and_offsets_scale_metals_only() {
        let d = AtomicData::embedded();
        let base = Composition::default().abundances(d).unwrap();
        let c = Composition {
            metallicity: -1.0,
            offsets: vec![("Fe".into(), 0.3)],
            ..Composition::default()
        };
        let a = c.abundances(d).unwrap();
        let fe = d.element_index("Fe").unwrap();
        let he = d.element_index("He").unwrap();
        let mg = d.element_index("Mg").unwrap();
        assert!(((a[fe] / base[fe]).log10() + 0.7).abs() < 1e-12);
        assert!(((a[mg] / base[mg]).log10() + 1.0).abs() < 1e-12);
        assert!((a[he] / base[he] - 1.0).abs() < 1e-12);
        assert!((a[0] - 1.0).abs() < 1e-15);
    }

    #[test]
    fn bad_compositions_name_the_option() {
        let d = AtomicData::embedded();
        let bad = Composition {
            metallicity: 6.0,
            ..Composition::default()
        };
        assert!(
            bad.abundances(d)
                .unwrap_err()
                .to_string()
                .contains("--metallicity")
        );
        let bad = Composition {
            elements: Some(vec!["Fe".into()]),
            ..Composition::default()
        };
        assert!(
            bad.abundances(d)
                .unwrap_err()
                .to_string()
                .contains("must contain H")
        );
        let bad = Composition {
            elements: Some(vec!["H".into(), "Xx".into()]),
            ..Composition::default()
        };
        assert!(
            bad.abundances(d)
                .unwrap_err()
                .to_string()
                .contains("unknown element 'Xx'")
        );
    }
}
