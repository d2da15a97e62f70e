//! The aggregate statements of the in-database comparison, in plain SQL (a common table
//! expression, CAST, COUNT, AVG, SUM, MIN, MAX, GROUP BY) so that the same text runs on
//! SQLite, PostgreSQL and distributed SQL engines. Every identifier is quoted; lot values are
//! parameters (or, for an engine lotshift cannot reach, quoted literals).
//!
//! Accuracy: the moments statement makes two passes over each lot inside the database: the
//! means first (`m`), then the sums of the centred values and of their products. lotshift
//! takes the centred sums' residual `r = Σ (x − m)` as a correction (mean `m + r/n`,
//! `SSP = Σ (x − m)(x − m)ᵀ − r rᵀ/n`), the corrected two-pass algorithm (Chan, Golub &
//! LeVeque 1983, The American Statistician 37:242).

use super::Dialect;

/// Quotes an identifier for SQL (`"name"`, an inner `"` doubled).
pub fn quote_ident(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// Quotes a text literal for SQL (`'value'`, an inner `'` doubled).
pub fn quote_literal(value: &str) -> String {
    format!("'{}'", value.replace('\'', "''"))
}

/// A number written into a statement so that the database reads back the same double.
pub fn number_literal(v: f64) -> String {
    // Rust writes the shortest text that reads back as the same double; the exponent form
    // keeps very large and small values short.
    let s = format!("{v:e}");
    if s.contains('e') && !s.contains('.') {
        // 1e5 → 1.0e5: some engines read `1e5` as an integer type.
        let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
        format!("{m}.0e{e}")
    } else {
        s
    }
}

/// What the statements compute on: the user's query, the lot column, the two lot values and
/// the characteristics (as the result's column names).
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// The user's query (one SELECT).
    pub query: String,
    /// The lot column.
    pub lot_column: String,
    /// Reference and candidate value.
    pub lots: [String; 2],
    /// The characteristics' column names in the result, in comparison order.
    pub columns: Vec<String>,
    /// Label columns to return with each outlier.
    pub labels: Vec<String>,
}

impl Plan {
    fn lot_expr(&self) -> String {
        format!("CAST(q.{} AS VARCHAR)", quote_ident(&self.lot_column))
    }

    /// The placeholder or literal of lot `g` (0 reference, 1 candidate) in a statement over
    /// both lots (parameters 1 and 2).
    pub fn lot_value(&self, dialect: Dialect, g: usize) -> String {
        self.placeholder(dialect, g, g + 1)
    }

    /// Lot `g` as parameter `index`, or as a quoted literal for [`Dialect::Generic`]. A
    /// statement over one lot takes it as parameter 1.
    fn placeholder(&self, dialect: Dialect, g: usize, index: usize) -> String {
        match dialect {
            Dialect::Sqlite => format!("?{index}"),
            Dialect::Postgres => format!("${index}"),
            Dialect::Generic => quote_literal(&self.lots[g]),
        }
    }

    fn source(&self) -> String {
        format!("(\n{}\n) AS q", self.query.trim().trim_end_matches(';'))
    }

    /// `WHERE` for the units of lot `g` with every characteristic present (listwise).
    fn units_where(&self, dialect: Dialect, g: Option<usize>) -> String {
        let lot = match g {
            Some(g) => format!("{} = {}", self.lot_expr(), self.placeholder(dialect, g, 1)),
            None => format!(
                "{} IN ({}, {})",
                self.lot_expr(),
                self.lot_value(dialect, 0),
                self.lot_value(dialect, 1)
            ),
        };
        let mut parts = vec![lot];
        for c in &self.columns {
            parts.push(format!("q.{} IS NOT NULL", quote_ident(c)));
        }
        parts.join("\n  AND ")
    }

    /// Per lot: the rows read and the missing cells per characteristic (and, for SQLite,
    /// the cells stored as text or binary that do not start like a number).
    pub fn counts(&self, dialect: Dialect, g: usize) -> String {
        let mut cols = vec!["COUNT(*) AS rows_read".to_string()];
        for (k, c) in self.columns.iter().enumerate() {
            cols.push(format!(
                "SUM(CASE WHEN q.{} IS NULL THEN 1 ELSE 0 END) AS missing_{}",
                quote_ident(c),
                k + 1
            ));
            if dialect == Dialect::Sqlite {
                cols.push(format!(
                    "SUM(CASE WHEN typeof(q.{c}) = 'blob' OR (typeof(q.{c}) = 'text' AND \
                     trim(q.{c}) NOT GLOB '[-+0-9.]*') THEN 1 ELSE 0 END) AS not_number_{k}",
                    c = quote_ident(c),
                    k = k + 1
                ));
            }
        }
        format!(
            "SELECT {}\nFROM {}\nWHERE {} = {}",
            cols.join(",\n  "),
            self.source(),
            self.lot_expr(),
            self.placeholder(dialect, g, 1)
        )
    }

    /// `u`: the compared units of both lots, their lot and the characteristics as doubles.
    fn units_cte(&self, dialect: Dialect, g: Option<usize>, labels: bool) -> String {
        let mut cols = vec![format!("{} AS lot", self.lot_expr())];
        if labels {
            for (k, l) in self.labels.iter().enumerate() {
                cols.push(format!(
                    "CAST(q.{} AS VARCHAR) AS label_{}",
                    quote_ident(l),
                    k + 1
                ));
            }
        }
        for (k, c) in self.columns.iter().enumerate() {
            cols.push(format!(
                "CAST(q.{} AS DOUBLE PRECISION) AS v{}",
                quote_ident(c),
                k + 1
            ));
        }
        format!(
            "lotshift_u AS (\n  SELECT {}\n  FROM {}\n  WHERE {}\n)",
            cols.join(", "),
            self.source(),
            self.units_where(dialect, g)
        )
    }

    /// The moments of both lots in one statement, one row per lot: `lot`, `n`, per
    /// characteristic `mean_k`, `min_k`, `max_k` and the residual `resid_k = Σ (x − mean)`,
    /// and `ssp_i_j = Σ (xᵢ − meanᵢ)(xⱼ − meanⱼ)` for i ≤ j.
    pub fn moments(&self, dialect: Dialect) -> String {
        let p = self.columns.len();
        let mut m = vec!["lot".to_string(), "COUNT(*) AS n".to_string()];
        for k in 1..=p {
            m.push(format!("AVG(v{k}) AS mean_{k}"));
            m.push(format!("MIN(v{k}) AS min_{k}"));
            m.push(format!("MAX(v{k}) AS max_{k}"));
        }
        let mut out = vec!["m.lot AS lot".to_string(), "MAX(m.n) AS n".to_string()];
        for k in 1..=p {
            out.push(format!("MAX(m.mean_{k}) AS mean_{k}"));
            out.push(format!("MAX(m.min_{k}) AS min_{k}"));
            out.push(format!("MAX(m.max_{k}) AS max_{k}"));
        }
        for k in 1..=p {
            out.push(format!("SUM(u.v{k} - m.mean_{k}) AS resid_{k}"));
        }
        for i in 1..=p {
            for j in i..=p {
                out.push(format!(
                    "SUM((u.v{i} - m.mean_{i}) * (u.v{j} - m.mean_{j})) AS ssp_{i}_{j}"
                ));
            }
        }
        format!(
            "WITH {},\nlotshift_m AS (\n  SELECT {}\n  FROM lotshift_u GROUP BY lot\n)\nSELECT {}\nFROM lotshift_u AS u JOIN lotshift_m AS m ON u.lot = m.lot\nGROUP BY m.lot",
            self.units_cte(dialect, None, false),
            m.join(", "),
            out.join(",\n  ")
        )
    }

    /// `lotshift_y`: lot `g`'s units centred and scaled with constants computed from the
    /// moments: `y_k = ((x_k − hi_k) − lo_k) / sd_k`, the mean split in two doubles
    /// (`hi + lo`) so that the centring keeps every digit.
    fn centred_cte(&self, dialect: Dialect, g: usize, w: &Whiten, labels: bool) -> String {
        let mut cols = Vec::new();
        if labels {
            for k in 1..=self.labels.len() {
                cols.push(format!("label_{k}"));
            }
        }
        for k in 0..self.columns.len() {
            cols.push(format!(
                "((v{i} - {}) - {}) * {} AS y{i}",
                number_literal(w.mean_hi[k]),
                number_literal(w.mean_lo[k]),
                number_literal(1.0 / w.sd[k]),
                i = k + 1
            ));
        }
        // SQLite and PostgreSQL are told to compute the centred values once: an engine that
        // inlines the expression repeats it in each of the hundreds of sums that read it.
        // Plain SQL has no such hint; an engine without it may do either.
        let hint = match dialect {
            Dialect::Sqlite | Dialect::Postgres => "MATERIALIZED ",
            Dialect::Generic => "",
        };
        format!(
            "{},\nlotshift_y AS {hint}(\n  SELECT {}\n  FROM lotshift_u\n)",
            self.units_cte(dialect, Some(g), labels),
            cols.join(",\n    ")
        )
    }

    /// `yᵀ R⁻¹ y`, the squared whitened length, written out with the coefficients of the
    /// inverse correlation matrix.
    fn quadratic_form(w: &Whiten) -> String {
        let p = w.sd.len();
        let mut terms = Vec::new();
        for i in 0..p {
            for j in i..p {
                let a = w.inverse_correlation[i][j] * if i == j { 1.0 } else { 2.0 };
                if a != 0.0 {
                    terms.push(format!("{} * y{} * y{}", number_literal(a), i + 1, j + 1));
                }
            }
        }
        if terms.is_empty() {
            "0.0".into()
        } else {
            terms.join(" + ")
        }
    }

    /// Mardia's moments of lot `g`: the third moments of the centred, scaled units,
    /// `t_i_j_k = Σ yᵢ yⱼ y_k` for i ≤ j ≤ k (lotshift whitens them afterwards, as a tensor),
    /// and `r4 = Σ (yᵀ R⁻¹ y)²`. Each sum multiplies plain columns, so an engine that
    /// inlines the common table expressions repeats no long expression.
    pub fn mardia(&self, dialect: Dialect, g: usize, w: &Whiten) -> String {
        let p = self.columns.len();
        let mut out = Vec::new();
        for a in 1..=p {
            for b in a..=p {
                for c in b..=p {
                    out.push(format!("SUM(y{a} * y{b} * y{c}) AS t_{a}_{b}_{c}"));
                }
            }
        }
        out.push("SUM(r2 * r2) AS r4".into());
        format!(
            "WITH {},\nlotshift_r AS (\n  SELECT *, {} AS r2\n  FROM lotshift_y\n)\nSELECT {}\nFROM lotshift_r",
            self.centred_cte(dialect, g, w, false),
            Self::quadratic_form(w),
            out.join(",\n  ")
        )
    }

    /// The units of lot `g` whose squared whitened length is above `cutoff`, with their
    /// label columns, largest first (at most `limit`).
    pub fn outliers(
        &self,
        dialect: Dialect,
        g: usize,
        w: &Whiten,
        cutoff: f64,
        limit: usize,
    ) -> String {
        let mut cols: Vec<String> = (1..=self.labels.len())
            .map(|k| format!("label_{k}"))
            .collect();
        cols.push(format!("{} AS r2", Self::quadratic_form(w)));
        format!(
            "WITH {},\nlotshift_d AS (\n  SELECT {}\n  FROM lotshift_y\n)\nSELECT *\nFROM lotshift_d\nWHERE r2 > {}\nORDER BY r2 DESC\nLIMIT {limit}",
            self.centred_cte(dialect, g, w, true),
            cols.join(", "),
            number_literal(cutoff)
        )
    }
}

/// The constants of one lot's second statements: its mean as `hi + lo`, the standard
/// deviations and the correlation matrix's Cholesky factor inverted, all of the divisor-n
/// covariance `S̃ = D R D`, `R = L Lᵀ`.
#[derive(Debug, Clone, PartialEq)]
pub struct Whiten {
    /// `L⁻¹`, lower triangular, row by row.
    pub l_inverse: Vec<Vec<f64>>,
    /// `R⁻¹ = L⁻ᵀ L⁻¹`, row by row.
    pub inverse_correlation: Vec<Vec<f64>>,
    /// Standard deviations (divisor n).
    pub sd: Vec<f64>,
    /// The mean's leading double.
    pub mean_hi: Vec<f64>,
    /// The rest of the mean.
    pub mean_lo: Vec<f64>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_and_values_are_quoted() {
        assert_eq!(
            quote_ident("x\"; DROP TABLE t; --"),
            "\"x\"\"; DROP TABLE t; --\""
        );
        assert_eq!(quote_literal("O'Brien"), "'O''Brien'");
    }

    #[test]
    fn numbers_read_back_exactly() {
        for v in [0.1, -1e-300, 123456.789, 1e5, 2.0f64.sqrt(), f64::MAX] {
            let s = number_literal(v);
            assert_eq!(s.parse::<f64>().unwrap(), v, "{s}");
            assert!(s.contains('.'), "{s}");
        }
    }
}
