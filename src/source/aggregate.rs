//! The comparison computed inside the database: lotshift generates the aggregate statements
//! ([`super::statements`]), runs them read-only and compares from the lots' moments. Nothing
//! but the moments, Mardia's sums and the units beyond the outlier cutoff leaves the
//! database. What needs every unit in memory is reported as not computed.

use nalgebra::{DMatrix, DVector};

use super::statements::{Plan, Whiten};
use super::{QuerySource, ResultTable, Session, SourceError};
use crate::analysis::{self, Comparison, InDatabase, LabelledOutlier, OutlierReport, Settings};
use crate::data::{self, ColumnData, LoadErrorKind, LoadOptions, RawCell, match_key};
use crate::stats::checks::{self, Outlier};
use crate::stats::moments::{ColumnSummary, LotMoments};

/// Mardia's moments are computed inside the database up to this many characteristics (the
/// statement has one sum per triple a ≤ b ≤ c: 220 for 10).
pub const MARDIA_MAX_P: usize = 10;

/// At most this many units beyond the outlier cutoff are returned per lot.
pub const OUTLIER_LIMIT: usize = 1000;

/// Which characteristics to compare (by name, as for files).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Choice {
    /// Only these, in this order.
    pub only: Option<Vec<String>>,
    /// Leave these out.
    pub exclude: Vec<String>,
}

/// One lot as counted inside the database.
#[derive(Debug, Clone, PartialEq)]
pub struct CountedLot {
    /// The lot value.
    pub value: String,
    /// Rows with this lot value.
    pub rows_read: usize,
    /// Units compared (every characteristic present).
    pub n: usize,
    /// Missing cells per characteristic.
    pub missing: Vec<usize>,
}

/// The outcome: the comparison, the lots as counted and every statement that ran.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The comparison.
    pub comparison: Comparison,
    /// Reference and candidate.
    pub lots: [CountedLot; 2],
    /// The characteristics' column names in the result.
    pub columns: Vec<String>,
    /// The statements, in the order they ran, with their times and result sizes.
    pub statements: Vec<Ran>,
    /// The database and query.
    pub source: QuerySource,
}

/// One statement that ran.
#[derive(Debug, Clone, PartialEq)]
pub struct Ran {
    /// Its text.
    pub sql: String,
    /// Seconds it took, result included.
    pub seconds: f64,
    /// Bytes of its result, as the server sends them ([`ResultTable::wire_bytes`]).
    pub bytes: u64,
}

fn timed(
    session: &mut Session,
    sql: String,
    params: &[&str],
    log: &mut Vec<Ran>,
) -> Result<ResultTable, SourceError> {
    let start = std::time::Instant::now();
    let t = session.statement(&sql, params)?;
    log.push(Ran {
        sql,
        seconds: start.elapsed().as_secs_f64(),
        bytes: t.wire_bytes(),
    });
    Ok(t)
}

/// Why the in-database comparison stopped.
#[derive(Debug, thiserror::Error)]
pub enum AggregateError {
    /// The database or the query.
    #[error(transparent)]
    Source(#[from] SourceError),
    /// The engine.
    #[error(transparent)]
    Engine(#[from] crate::stats::EngineError),
}

fn load_error(source: &QuerySource, why: String) -> SourceError {
    SourceError::Load(data::LoadError::new(
        &format!("query result ({})", source.database.url()),
        LoadErrorKind::Invalid(why),
    ))
}

fn number(table: &ResultTable, row: usize, column: &str) -> Option<f64> {
    let k = table
        .columns
        .iter()
        .position(|c| c.eq_ignore_ascii_case(column))?;
    match table.rows.get(row)?.get(k)? {
        RawCell::Number(v) => Some(*v),
        RawCell::Text(t) => t.trim().parse().ok(),
        RawCell::Null => None,
    }
}

/// The plan of a source: the characteristics (numeric columns, by the file rules on the
/// first 1,000 rows), the label columns and the two lot values.
///
/// # Errors
/// The query fails, the lot column is not in the result, the lots cannot be chosen.
pub fn plan(
    session: &mut Session,
    source: &QuerySource,
    options: &LoadOptions,
    choice: &Choice,
) -> Result<Planned, SourceError> {
    let body = source.query.trim().trim_end_matches(';');
    let probe = session.query(&format!("SELECT * FROM (\n{body}\n) AS probe LIMIT 1000"))?;
    let mut opts = options.clone();
    opts.labels.push(source.lot_column.clone());
    let name = format!("query result ({})", source.database.url());
    let empty = data::Provenance::of_rows(&name, source.database.kind());
    let table = data::from_cells(
        &name,
        &probe.columns,
        &probe.rows,
        "result row",
        &opts,
        empty,
    )?;
    let lot_col = table
        .column(&source.lot_column)
        .ok_or_else(|| {
            SourceError::Load(data::LoadError {
                column: Some(source.lot_column.clone()),
                ..data::LoadError::new(
                    &name,
                    LoadErrorKind::NoLotColumn {
                        available: probe.columns.clone(),
                    },
                )
            })
        })?
        .header
        .clone();
    let numeric: Vec<&data::Column> = table
        .columns
        .iter()
        .filter(|c| c.is_numeric() && c.header != lot_col)
        .collect();
    let mut chosen: Vec<&data::Column> = match &choice.only {
        Some(names) => {
            let mut out = Vec::new();
            for n in names {
                let Some(c) = numeric.iter().find(|c| {
                    match_key(&c.name) == match_key(n) || match_key(&c.header) == match_key(n)
                }) else {
                    return Err(load_error(
                        source,
                        format!("no numeric column \"{n}\" in the query's result"),
                    ));
                };
                out.push(*c);
            }
            out
        }
        None => numeric.clone(),
    };
    chosen.retain(|c| {
        !choice
            .exclude
            .iter()
            .any(|e| match_key(e) == match_key(&c.name) || match_key(e) == match_key(&c.header))
    });
    if chosen.is_empty() {
        return Err(load_error(
            source,
            "the query's result has no numeric column to compare".into(),
        ));
    }
    let labels: Vec<String> = table
        .columns
        .iter()
        .filter(|c| matches!(c.data, ColumnData::Text(_)) && c.header != lot_col)
        .map(|c| c.header.clone())
        .collect();
    let lots = match &source.lot_values {
        Some(v) => v.clone(),
        None => {
            let distinct = session.statement(
                &format!(
                    "SELECT DISTINCT CAST(q.{c} AS VARCHAR) AS lot FROM (\n{body}\n) AS q WHERE q.{c} IS NOT NULL LIMIT 51",
                    c = super::statements::quote_ident(&lot_col)
                ),
                &[],
            )?;
            let mut values: Vec<String> = distinct
                .rows
                .iter()
                .filter_map(|r| r.first().map(RawCell::text))
                .collect();
            // The order rows first show them in, where the first rows show both.
            let seen = data::lot_values(&table, &lot_col).unwrap_or_default();
            values.sort_by_key(|v| seen.iter().position(|s| s == v).unwrap_or(usize::MAX));
            match values.as_slice() {
                [a, b] => [a.clone(), b.clone()],
                _ => {
                    return Err(SourceError::Load(data::LoadError {
                        column: Some(lot_col.clone()),
                        ..data::LoadError::new(
                            &name,
                            LoadErrorKind::LotValues {
                                why: match values.len() {
                                    0 => "the lot column is empty".into(),
                                    1 => "the lot column holds only one lot".into(),
                                    _ => "the lot column holds more than two lots; choose two (--lot-values A,B)".into(),
                                },
                                values,
                            },
                        )
                    }));
                }
            }
        }
    };
    let plan = Plan {
        query: body.to_string(),
        lot_column: lot_col,
        lots,
        columns: chosen.iter().map(|c| c.header.clone()).collect(),
        labels,
    };
    let names = chosen.iter().map(|c| c.name.clone()).collect();
    let units = chosen.iter().map(|c| c.unit.clone()).collect();
    Ok((plan, units, names))
}

/// A plan with the characteristics' units and names (without the unit).
pub type Planned = (Plan, Vec<Option<String>>, Vec<String>);

/// Runs the comparison inside the database.
///
/// # Errors
/// The database's refusal, a lot without units, text in a characteristic, the engine's error.
pub fn compare_in_database(
    source: &QuerySource,
    password: Option<&str>,
    options: &LoadOptions,
    choice: &Choice,
    settings: &Settings,
) -> Result<Outcome, AggregateError> {
    let mut session = source.database.connect(password)?;
    let dialect = source.database.dialect();
    let (plan, units, names) = plan(&mut session, source, options, choice)?;
    let p = plan.columns.len();
    let params = [plan.lots[0].as_str(), plan.lots[1].as_str()];
    let mut statements = Vec::new();
    let mut counted = Vec::with_capacity(2);
    for g in 0..2 {
        let t = timed(
            &mut session,
            plan.counts(dialect, g),
            &params[g..=g],
            &mut statements,
        )?;
        let rows_read = number(&t, 0, "rows_read").unwrap_or(0.0) as usize;
        if rows_read == 0 {
            return Err(load_error(
                source,
                format!(
                    "no row of the query's result has the lot value \"{}\" in \"{}\"",
                    plan.lots[g], plan.lot_column
                ),
            )
            .into());
        }
        let mut missing = Vec::with_capacity(p);
        for k in 1..=p {
            missing.push(number(&t, 0, &format!("missing_{k}")).unwrap_or(0.0) as usize);
            if let Some(bad) = number(&t, 0, &format!("not_number_{k}"))
                && bad > 0.0
            {
                return Err(load_error(
                    source,
                    format!(
                        "column \"{}\" holds {} value{} in lot \"{}\" that {} not a number; \
                         run without --in-database to see where",
                        plan.columns[k - 1],
                        bad as usize,
                        if bad == 1.0 { "" } else { "s" },
                        plan.lots[g],
                        if bad == 1.0 { "is" } else { "are" }
                    ),
                )
                .into());
            }
        }
        counted.push(CountedLot {
            value: plan.lots[g].clone(),
            rows_read,
            n: 0,
            missing,
        });
    }
    let t = timed(
        &mut session,
        plan.moments(dialect),
        &params,
        &mut statements,
    )?;
    let mut parts = Vec::with_capacity(2);
    for (g, counted) in counted.iter_mut().enumerate() {
        let row = t
            .rows
            .iter()
            .position(|r| r.first().map(RawCell::text).as_deref() == Some(plan.lots[g].as_str()));
        let Some(row) = row else {
            return Err(load_error(
                source,
                format!(
                    "lot \"{}\" has no unit with every characteristic present",
                    plan.lots[g]
                ),
            )
            .into());
        };
        let sums = LotSums::from_result(&t, row, p)
            .map_err(|why| load_error(source, format!("lot \"{}\": {why}", plan.lots[g])))?;
        counted.n = sums.n;
        parts.push(sums);
    }
    let lot_names = [plan.lots[0].as_str(), plan.lots[1].as_str()];
    let mut c = compare_sums(&names, &units, lot_names, [&parts[0], &parts[1]], settings)?;
    let mut not_computed = vec![
        "the leave-one-out misclassification rate".to_string(),
        "the permutation p-value".to_string(),
        "medians".to_string(),
        "Shapiro–Wilk and the large-lot normality tests per characteristic".to_string(),
        "the T² without the units flagged as outliers".to_string(),
    ];
    let mut db = InDatabase {
        not_computed: Vec::new(),
        outliers: Vec::new(),
        outliers_truncated: false,
    };
    if settings.checks {
        let mut report = OutlierReport {
            cutoff: [f64::NAN; 2],
            units: Vec::new(),
        };
        for g in 0..2 {
            let LotSums { n, hi, lo, ssp, .. } = &parts[g];
            let Some(w) = whitening(*n, hi, lo, ssp) else {
                continue;
            };
            if p <= MARDIA_MAX_P {
                let t = timed(
                    &mut session,
                    plan.mardia(dialect, g, &w),
                    &params[g..=g],
                    &mut statements,
                )?;
                let nf = *n as f64;
                let b1 = b1_from_moments(p, *n, &w, |i, j, k| {
                    number(&t, 0, &format!("t_{}_{}_{}", i + 1, j + 1, k + 1)).unwrap_or(f64::NAN)
                });
                let b2 = number(&t, 0, "r4").unwrap_or(f64::NAN) / nf;
                c.mardia
                    .push(checks::mardia_from(&plan.lots[g], *n, p, b1, b2));
            }
            let cutoff = checks::outlier_cutoff(*n, p, settings.alpha);
            if cutoff.is_nan() {
                continue;
            }
            report.cutoff[g] = cutoff;
            let nf = *n as f64;
            let sql = plan.outliers(dialect, g, &w, cutoff * nf / (nf - 1.0), OUTLIER_LIMIT);
            let t = timed(&mut session, sql, &params[g..=g], &mut statements)?;
            if t.rows.len() >= OUTLIER_LIMIT {
                db.outliers_truncated = true;
            }
            for (i, r) in t.rows.iter().enumerate() {
                let r2 = number(&t, i, "r2").unwrap_or(f64::NAN);
                let d2 = r2 * (nf - 1.0) / nf;
                let p_value = checks::outlier_p(*n, p, d2);
                report.units.push(Outlier {
                    lot: g,
                    unit: report.units.iter().filter(|u| u.lot == g).count(),
                    d2,
                    p_value,
                });
                db.outliers.push(LabelledOutlier {
                    lot: g,
                    d2,
                    p_value,
                    labels: plan
                        .labels
                        .iter()
                        .zip(r)
                        .map(|(l, v)| (l.clone(), v.text()))
                        .collect(),
                });
            }
        }
        c.outliers = Some(report);
        if p > MARDIA_MAX_P {
            not_computed.push(format!(
                "Mardia's tests (computed inside the database up to {MARDIA_MAX_P} characteristics)"
            ));
        }
    }
    db.not_computed = not_computed;
    c.in_database = Some(db);
    analysis::conclude_again(&mut c);
    let [a, b] = <[CountedLot; 2]>::try_from(counted).expect("two lots");
    Ok(Outcome {
        comparison: c,
        lots: [a, b],
        columns: plan.columns.clone(),
        statements,
        source: source.clone(),
    })
}

/// The constants of a lot's second statements from its moments: the divisor-n covariance on
/// the correlation scale, its Cholesky factor `L`, `L⁻¹` and `R⁻¹ = L⁻ᵀ L⁻¹`. The statements
/// need the coefficients themselves (a solve cannot be written into SQL), so `L⁻¹` is formed
/// here, by forward substitution on the identity. `None` when the covariance is singular.
fn whitening(n: usize, hi: &[f64], lo: &[f64], ssp: &DMatrix<f64>) -> Option<Whiten> {
    let p = hi.len();
    let cov = ssp / n as f64;
    let sd: Vec<f64> = (0..p).map(|k| cov[(k, k)].sqrt()).collect();
    if sd.iter().any(|s| !(s.is_finite() && *s > 0.0)) {
        return None;
    }
    let corr = DMatrix::from_fn(p, p, |i, j| cov[(i, j)] / (sd[i] * sd[j]));
    let l = nalgebra::Cholesky::new(corr)?.l();
    let linv = l.solve_lower_triangular(&DMatrix::identity(p, p))?;
    let rinv = linv.tr_mul(&linv);
    let rows = |m: &DMatrix<f64>| {
        (0..p)
            .map(|i| (0..p).map(|j| m[(i, j)]).collect())
            .collect()
    };
    Some(Whiten {
        l_inverse: rows(&linv),
        inverse_correlation: rows(&rinv),
        sd,
        mean_hi: hi.to_vec(),
        mean_lo: lo.to_vec(),
    })
}

/// Mardia's `b1,p` from the third moments of the centred, scaled units (`t(i, j, k)` for
/// i ≤ j ≤ k): the tensor whitened by `L⁻¹` in each of its three modes,
/// `T_abc = Σ L⁻¹_ai L⁻¹_bj L⁻¹_ck t_ijk`, then `b1 = Σ_abc (T_abc / n)²`.
fn b1_from_moments(p: usize, n: usize, w: &Whiten, t: impl Fn(usize, usize, usize) -> f64) -> f64 {
    let idx = |i: usize, j: usize, k: usize| (i * p + j) * p + k;
    let mut m = vec![0.0; p * p * p];
    for i in 0..p {
        for j in 0..p {
            for k in 0..p {
                let mut s = [i, j, k];
                s.sort_unstable();
                m[idx(i, j, k)] = t(s[0], s[1], s[2]);
            }
        }
    }
    let l = &w.l_inverse;
    // Three mode products, one index at a time.
    let mode = |src: &[f64], which: usize| -> Vec<f64> {
        let mut out = vec![0.0; p * p * p];
        for a in 0..p {
            for x in 0..p {
                for y in 0..p {
                    let mut acc = 0.0;
                    for (i, la) in l[a].iter().enumerate().take(a + 1) {
                        let v = match which {
                            0 => src[idx(i, x, y)],
                            1 => src[idx(x, i, y)],
                            _ => src[idx(x, y, i)],
                        };
                        acc += la * v;
                    }
                    match which {
                        0 => out[idx(a, x, y)] = acc,
                        1 => out[idx(x, a, y)] = acc,
                        _ => out[idx(x, y, a)] = acc,
                    }
                }
            }
        }
        out
    };
    let whitened = mode(&mode(&mode(&m, 0), 1), 2);
    let nf = n as f64;
    whitened.iter().map(|v| (v / nf) * (v / nf)).sum()
}

/// The record of an in-database comparison: each lot's source (no row hash: no row left the
/// database), rows read, units compared and missing cells as counted there.
pub fn record(
    c: &Comparison,
    lots: &[CountedLot; 2],
    source: &QuerySource,
) -> crate::report::Record {
    let mut r = crate::report::Record::new(c, None);
    for (rec, lot) in r.lots.iter_mut().zip(lots) {
        rec.file = Some(source.database.url().to_string());
        rec.split = Some((source.lot_column.clone(), lot.value.clone()));
        rec.n_read = lot.rows_read;
        rec.n_excluded = lot.rows_read.saturating_sub(lot.n);
        rec.missing = lot.missing.clone();
        rec.source = Some(crate::report::SourceRecord {
            kind: source.database.kind().to_string(),
            url: source.database.url().to_string(),
            query: source.query.clone(),
            lot_column: source.lot_column.clone(),
            lot_value: lot.value.clone(),
            rows_read: lot.rows_read,
            rows_sha256: None,
            in_database: true,
        });
    }
    r
}

/// One lot's sums as the moments statement returns them.
#[derive(Debug, Clone, PartialEq)]
pub struct LotSums {
    /// Units.
    pub n: usize,
    /// The pass-one means.
    pub hi: Vec<f64>,
    /// Their corrections, `Σ (x − mean) / n`.
    pub lo: Vec<f64>,
    /// `Σ (x − x̄)(x − x̄)ᵀ`, corrected.
    pub ssp: DMatrix<f64>,
    /// Smallest values.
    pub min: Vec<f64>,
    /// Largest values.
    pub max: Vec<f64>,
}

impl LotSums {
    /// Reads row `row` of a moments result (columns `n`, `mean_k`, `min_k`, `max_k`,
    /// `resid_k`, `ssp_i_j`) for `p` characteristics.
    ///
    /// # Errors
    /// A missing column or a value that is not a finite number, in words.
    pub fn from_result(t: &ResultTable, row: usize, p: usize) -> Result<LotSums, String> {
        let get = |c: String| -> Result<f64, String> {
            match number(t, row, &c) {
                Some(v) if v.is_finite() => Ok(v),
                Some(_) => Err(format!(
                    "\"{c}\" is not finite: a characteristic holds NaN or an infinite value \
                     (in-database mode reads only NULL as a missing value)"
                )),
                None => Err(format!("the result has no number in column \"{c}\"")),
            }
        };
        let nf = get("n".into())?;
        if nf < 1.0 || nf.fract() != 0.0 {
            return Err(format!("\"n\" must be a count of units (got {nf})"));
        }
        let n = nf as usize;
        let mut hi = Vec::with_capacity(p);
        let mut resid = Vec::with_capacity(p);
        let mut min = Vec::with_capacity(p);
        let mut max = Vec::with_capacity(p);
        for k in 1..=p {
            hi.push(get(format!("mean_{k}"))?);
            resid.push(get(format!("resid_{k}"))?);
            min.push(get(format!("min_{k}"))?);
            max.push(get(format!("max_{k}"))?);
        }
        let mut ssp = DMatrix::<f64>::zeros(p, p);
        for i in 0..p {
            for j in i..p {
                let v = get(format!("ssp_{}_{}", i + 1, j + 1))? - resid[i] * resid[j] / nf;
                ssp[(i, j)] = v;
                ssp[(j, i)] = v;
            }
        }
        Ok(LotSums {
            n,
            lo: resid.iter().map(|r| r / nf).collect(),
            hi,
            ssp,
            min,
            max,
        })
    }
}

/// Compares two lots from their sums: the moments measured from the reference's pass-one
/// mean, each lot's mean carried as `hi + lo` so that the difference keeps every digit.
///
/// # Errors
/// As [`analysis::compare_moments`].
pub fn compare_sums(
    names: &[String],
    units: &[Option<String>],
    lots: [&str; 2],
    sums: [&LotSums; 2],
    settings: &Settings,
) -> Result<Comparison, crate::stats::EngineError> {
    let p = names.len();
    let origin = DVector::from_vec(sums[0].hi.clone());
    let moments: Vec<LotMoments> = sums
        .iter()
        .map(|s| LotMoments {
            n: s.n,
            origin: origin.clone(),
            // (hi − origin) is exact for nearby doubles; the correction carries the rest.
            offset: DVector::from_fn(p, |k, _| (s.hi[k] - origin[k]) + s.lo[k]),
            ssp: s.ssp.clone(),
            spread_scale: DVector::from_fn(p, |k, _| {
                (s.min[k] - origin[k])
                    .abs()
                    .max((s.max[k] - origin[k]).abs())
            }),
        })
        .collect();
    let summaries: Vec<[ColumnSummary; 2]> = (0..p)
        .map(|k| {
            [0, 1].map(|g| {
                let s = sums[g];
                ColumnSummary {
                    n: s.n,
                    mean: s.hi[k] + s.lo[k],
                    sd: if s.n > 1 {
                        (s.ssp[(k, k)] / (s.n - 1) as f64).sqrt()
                    } else {
                        f64::NAN
                    },
                    min: s.min[k],
                    median: f64::NAN,
                    max: s.max[k],
                    decimals: None,
                }
            })
        })
        .collect();
    analysis::compare_moments(
        names,
        units,
        lots,
        [&moments[0], &moments[1]],
        summaries,
        settings,
    )
}
