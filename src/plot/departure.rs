//! Tables of departure coefficients b_n = n_n / n_n(LTE) of hydrogen levels against electron
//! density, as a collisional–radiative model produces them, read from CSV or JSON text.
//!
//! CSV: a header `n_e,b_1,b_2,…,b_N` (the column `n_e` first, in cm⁻³; then one column
//! `b_<n>` per level, n the principal quantum number, distinct, in any order), then one row
//! per electron density. Blank lines and lines starting with `#` are skipped. Every n_e must be
//! finite and positive, every b finite and ≥ 0.
//!
//! JSON: one object `{"n_e": [...], "levels": [1, 2, ...], "b": [[b_1, b_2, ...], ...]}` —
//! `b` has one row per entry of `n_e`, each with one value per entry of `levels`.
//!
//! A model in the library can hand its result over directly as a [`DepartureTable`].

/// Departure coefficients on a set of electron densities.
#[derive(Debug, Clone, PartialEq)]
pub struct DepartureTable {
    /// Electron densities, cm⁻³.
    pub electron_density: Vec<f64>,
    /// Principal quantum numbers of the levels.
    pub levels: Vec<u32>,
    /// `b[row][k]`: departure coefficient of `levels[k]` at `electron_density[row]`.
    pub b: Vec<Vec<f64>>,
}

/// Errors reading a table; each names the source and where in it.
#[derive(Debug, thiserror::Error)]
pub enum DepartureError {
    /// A bad header.
    #[error("{source_name}: header: {reason}")]
    Header {
        /// File name (or "standard input").
        source_name: String,
        /// What was wrong.
        reason: String,
    },
    /// A bad row or value.
    #[error("{source_name}: line {line}, column '{column}': {reason}")]
    Value {
        /// File name.
        source_name: String,
        /// 1-based line number (CSV) or row index + 1 (JSON).
        line: usize,
        /// Column (`n_e` or `b_<n>`).
        column: String,
        /// What was wrong.
        reason: String,
    },
    /// Malformed JSON or a JSON object of the wrong shape.
    #[error("{source_name}: {reason}")]
    Json {
        /// File name.
        source_name: String,
        /// What was wrong.
        reason: String,
    },
    /// No data rows.
    #[error("{source_name}: no data rows")]
    Empty {
        /// File name.
        source_name: String,
    },
}

impl DepartureTable {
    /// Check the values (positive finite n_e, finite b ≥ 0, distinct positive levels, shape).
    pub fn validate(&self, source_name: &str) -> Result<(), DepartureError> {
        let header = |reason: String| DepartureError::Header {
            source_name: source_name.to_string(),
            reason,
        };
        if self.levels.is_empty() {
            return Err(header("no level columns b_<n>".into()));
        }
        for (i, n) in self.levels.iter().enumerate() {
            if *n == 0 {
                return Err(header(
                    "level 0: principal quantum numbers start at 1".into(),
                ));
            }
            if self.levels[..i].contains(n) {
                return Err(header(format!("level {n} appears twice")));
            }
        }
        if self.electron_density.is_empty() {
            return Err(DepartureError::Empty {
                source_name: source_name.to_string(),
            });
        }
        if self.b.len() != self.electron_density.len() {
            return Err(header(format!(
                "{} rows of b for {} electron densities",
                self.b.len(),
                self.electron_density.len()
            )));
        }
        for (row, (ne, bs)) in self.electron_density.iter().zip(&self.b).enumerate() {
            let bad = |column: String, reason: String| DepartureError::Value {
                source_name: source_name.to_string(),
                line: row + 1,
                column,
                reason,
            };
            if !(ne.is_finite() && *ne > 0.0) {
                return Err(bad(
                    "n_e".into(),
                    format!("{ne}: must be a positive number of cm^-3"),
                ));
            }
            if bs.len() != self.levels.len() {
                return Err(bad(
                    "b".into(),
                    format!("{} values for {} levels", bs.len(), self.levels.len()),
                ));
            }
            for (k, v) in bs.iter().enumerate() {
                if !(v.is_finite() && *v >= 0.0) {
                    return Err(bad(
                        format!("b_{}", self.levels[k]),
                        format!("{v}: must be a finite number >= 0"),
                    ));
                }
            }
        }
        Ok(())
    }

    /// Read the CSV form (module docs).
    pub fn from_csv(text: &str, source_name: &str) -> Result<DepartureTable, DepartureError> {
        let header_err = |reason: String| DepartureError::Header {
            source_name: source_name.to_string(),
            reason,
        };
        let mut rows = text
            .lines()
            .enumerate()
            .map(|(i, l)| (i + 1, l.trim()))
            .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
        let (_, head) = rows
            .next()
            .ok_or_else(|| header_err("empty file: expected n_e,b_1,b_2,...".into()))?;
        let cols: Vec<&str> = head.split(',').map(str::trim).collect();
        if cols[0] != "n_e" {
            return Err(header_err(format!(
                "first column is '{}': expected n_e (electron density, cm^-3)",
                cols[0]
            )));
        }
        let mut levels = Vec::new();
        for c in &cols[1..] {
            let n = c
                .strip_prefix("b_")
                .and_then(|n| n.parse::<u32>().ok())
                .ok_or_else(|| {
                    header_err(format!(
                        "column '{c}': expected b_<n> with n a level number"
                    ))
                })?;
            levels.push(n);
        }
        let mut t = DepartureTable {
            electron_density: Vec::new(),
            levels,
            b: Vec::new(),
        };
        // Header-level checks first (no levels, duplicates) without rows.
        if t.levels.is_empty() {
            return Err(header_err("no level columns b_<n>".into()));
        }
        for (line, row) in rows {
            let fields: Vec<&str> = row.split(',').map(str::trim).collect();
            let bad = |column: &str, reason: String| DepartureError::Value {
                source_name: source_name.to_string(),
                line,
                column: column.to_string(),
                reason,
            };
            if fields.len() != cols.len() {
                return Err(bad(
                    "-",
                    format!("{} fields, the header has {}", fields.len(), cols.len()),
                ));
            }
            let num = |k: usize| {
                fields[k]
                    .parse::<f64>()
                    .map_err(|_| bad(cols[k], format!("'{}' is not a number", fields[k])))
            };
            t.electron_density.push(num(0)?);
            let mut bs = Vec::with_capacity(t.levels.len());
            for k in 1..cols.len() {
                bs.push(num(k)?);
            }
            t.b.push(bs);
        }
        t.validate_lines(source_name, text)?;
        Ok(t)
    }

    /// [`validate`](Self::validate), reporting file line numbers for the CSV form.
    fn validate_lines(&self, source_name: &str, text: &str) -> Result<(), DepartureError> {
        match self.validate(source_name) {
            Err(DepartureError::Value {
                source_name,
                line,
                column,
                reason,
            }) => {
                // Map the data-row index back to the file line.
                let file_line = text
                    .lines()
                    .enumerate()
                    .filter(|(_, l)| !l.trim().is_empty() && !l.trim().starts_with('#'))
                    .nth(line)
                    .map_or(line, |(i, _)| i + 1);
                Err(DepartureError::Value {
                    source_name,
                    line: file_line,
                    column,
                    reason,
                })
            }
            r => r,
        }
    }

    /// Read the JSON form (module docs).
    pub fn from_json(text: &str, source_name: &str) -> Result<DepartureTable, DepartureError> {
        #[derive(serde::Deserialize)]
        #[serde(deny_unknown_fields)]
        struct Raw {
            n_e: Vec<f64>,
            levels: Vec<u32>,
            b: Vec<Vec<f64>>,
        }
        let raw: Raw = serde_json::from_str(text).map_err(|e| DepartureError::Json {
            source_name: source_name.to_string(),
            reason: format!(
                "{e} (expected {{\"n_e\": [...], \"levels\": [...], \"b\": [[...], ...]}})"
            ),
        })?;
        let t = DepartureTable {
            electron_density: raw.n_e,
            levels: raw.levels,
            b: raw.b,
        };
        t.validate(source_name)?;
        Ok(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_and_json_read_the_same_table() {
        let csv = "# a comment\nn_e,b_1,b_3,b_2\n1e10,2.5,0.5,1.0\n\n1e12,1.5,0.75,0.9\n";
        let a = DepartureTable::from_csv(csv, "t.csv").unwrap();
        let json = r#"{"n_e": [1e10, 1e12], "levels": [1, 3, 2], "b": [[2.5, 0.5, 1.0], [1.5, 0.75, 0.9]]}"#;
        let b = DepartureTable::from_json(json, "t.json").unwrap();
        assert_eq!(a, b);
        assert_eq!(a.levels, vec![1, 3, 2]);
    }

    #[test]
    fn bad_tables_name_the_place() {
        let e = DepartureTable::from_csv("ne,b_1\n1,1\n", "t.csv").unwrap_err();
        assert!(e.to_string().contains("header"), "{e}");
        let e = DepartureTable::from_csv("n_e,b_1,b_x\n1,1,1\n", "t.csv").unwrap_err();
        assert!(e.to_string().contains("b_x"), "{e}");
        let e = DepartureTable::from_csv("n_e,b_1\n1e10,1\n# c\n1e11,abc\n", "t.csv").unwrap_err();
        assert!(e.to_string().contains("line 4, column 'b_1'"), "{e}");
        let e = DepartureTable::from_csv("n_e,b_1\n1e10,1\n-5,1\n", "t.csv").unwrap_err();
        assert!(e.to_string().contains("line 3, column 'n_e'"), "{e}");
        let e = DepartureTable::from_csv("n_e,b_1,b_1\n1e10,1,1\n", "t.csv").unwrap_err();
        assert!(e.to_string().contains("twice"), "{e}");
        let e = DepartureTable::from_csv("n_e,b_1\n", "t.csv").unwrap_err();
        assert!(matches!(e, DepartureError::Empty { .. }), "{e}");
        let e =
            DepartureTable::from_json(r#"{"n_e": [1], "levels": [1], "b": [[1, 2]]}"#, "t.json")
                .unwrap_err();
        assert!(e.to_string().contains("2 values for 1 levels"), "{e}");
    }
}
