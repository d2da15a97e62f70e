//! The stages of a comparison: validation, moments, the T² core, unit-level results, the
//! checks, permutations, summary-statistics input, and what screening and the specification
//! add. The one entry point for unit data is [`compare_units`].
//!
//! One job, kept in one file: the stages run in this order and share their intermediate moments.

#[allow(unused_imports)]
use super::*;

fn rows_of(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| m.row(i).iter().copied().collect())
        .collect()
}

fn check_common(names: &[String], p1: usize, p2: usize, alpha: f64) -> Result<(), EngineError> {
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(EngineError::BadAlpha(alpha));
    }
    if p1 != p2 {
        return Err(EngineError::DimensionMismatch(p1, p2));
    }
    if p1 == 0 || names.len() != p1 {
        return Err(EngineError::NoCharacteristics);
    }
    Ok(())
}

fn validate(
    characteristics: &[String],
    shapes: [(usize, usize); 2],
    names: [&str; 2],
    alpha: f64,
) -> Result<(), EngineError> {
    let p = shapes[0].1;
    check_common(characteristics, p, shapes[1].1, alpha)?;
    for (shape, name) in shapes.iter().zip(names) {
        if shape.0 == 0 {
            return Err(EngineError::EmptyLot(name.to_string()));
        }
    }
    // Checked before any cross-product: with thousands of characteristics and a few units the
    // p × p matrices alone would be large.
    let (n1, n2) = (shapes[0].0, shapes[1].0);
    if n1 + n2 < p + 2 {
        return Err(EngineError::TooFewUnits { n1, n2, p });
    }
    Ok(())
}

/// Unit data for [`compare_units`]: borrowed (the engine works on centred copies; the
/// window's path, which keeps the lots) or owned (centred in place, so memory holds one copy;
/// the command line's path for big lots). Both give the same numbers to the last bit: the
/// arithmetic is the same, only where the centred values are stored differs.
pub enum Units<'a> {
    /// `n × p` matrices of the two lots, left untouched.
    Borrowed([&'a DMatrix<f64>; 2]),
    /// `n × p` matrices the engine may consume.
    Owned([DMatrix<f64>; 2]),
}

impl Units<'_> {
    fn matrix(&self, g: usize) -> &DMatrix<f64> {
        match self {
            Units::Borrowed(d) => d[g],
            Units::Owned(d) => &d[g],
        }
    }
}

/// Per characteristic and lot: min, median and max of the values as measured (taken before
/// any centring), with mean and SD still to come from the moments.
fn order_statistics(data: [&DMatrix<f64>; 2]) -> Vec<[ColumnSummary; 2]> {
    use rayon::prelude::*;
    let p = data[0].ncols();
    let one: Vec<ColumnSummary> = (0..2 * p)
        .into_par_iter()
        .map(|j| column_summary(data[j % 2].column(j / 2).as_slice(), f64::NAN, f64::NAN))
        .collect();
    one.chunks_exact(2).map(|c| [c[0], c[1]]).collect()
}

/// Completes the summaries with the mean and SD of the lots' moments: one rule for every kind
/// of unit input.
fn complete_summaries(summaries: &mut [[ColumnSummary; 2]], m: [&LotMoments; 2]) {
    for (k, pair) in summaries.iter_mut().enumerate() {
        for (sum, m) in pair.iter_mut().zip(m) {
            sum.mean = m.origin[k] + m.offset[k];
            sum.sd = if m.n > 1 {
                (m.ssp[(k, k)] / (m.n - 1) as f64).sqrt()
            } else {
                f64::NAN
            };
        }
    }
}

/// Compares two lots from their unit data: the one entry point for unit input.
///
/// # Errors
/// Too few units for the number of characteristics, a constant characteristic, collinear
/// characteristics, mismatched shapes, a bad alpha, or cancellation.
pub fn compare_units(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    data: Units<'_>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    validate(
        characteristics,
        [data.matrix(0).shape(), data.matrix(1).shape()],
        names,
        settings.alpha,
    )?;
    progress.report("moments", 0.0);
    // Common origin: the first unit of the first lot.
    let origin: DVector<f64> = data.matrix(0).row(0).transpose();
    let mut summaries = order_statistics([data.matrix(0), data.matrix(1)]);
    let ([m1, m2], centred) = match data {
        Units::Borrowed(d) => {
            let ((m1, c1), (m2, c2)) = rayon::join(
                || LotMoments::from_data_centred(d[0], &origin),
                || LotMoments::from_data_centred(d[1], &origin),
            );
            ([m1, m2], [c1, c2])
        }
        Units::Owned([mut x, mut y]) => {
            let (m1, m2) = rayon::join(
                || LotMoments::centre_in_place(&mut x, &origin),
                || LotMoments::centre_in_place(&mut y, &origin),
            );
            ([m1, m2], [x, y])
        }
    };
    if progress.cancelled() {
        return Err(EngineError::Cancelled);
    }
    complete_summaries(&mut summaries, [&m1, &m2]);
    compare_centred(
        characteristics,
        units,
        names,
        [m1, m2],
        centred,
        summaries,
        settings,
        progress,
    )
}

/// Compares two lots from borrowed unit data ([`compare_units`] with [`Units::Borrowed`]).
///
/// # Errors
/// As [`compare_units`].
pub fn compare(
    characteristics: &[String],
    units: &[Option<String>],
    lots: [LotData<'_>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    compare_units(
        characteristics,
        units,
        [lots[0].name, lots[1].name],
        Units::Borrowed([lots[0].data, lots[1].data]),
        settings,
        progress,
    )
}

/// Compares two lots from unit data it consumes ([`compare_units`] with [`Units::Owned`]).
///
/// # Errors
/// As [`compare_units`].
pub fn compare_owned(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    data: [DMatrix<f64>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    compare_units(
        characteristics,
        units,
        names,
        Units::Owned(data),
        settings,
        progress,
    )
}

#[allow(clippy::too_many_arguments)]
fn compare_centred(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    moments: [LotMoments; 2],
    centred: [DMatrix<f64>; 2],
    summaries: Vec<[ColumnSummary; 2]>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    let [m1, m2] = moments;
    let [c1, c2] = centred;
    progress.report("test", 0.2);
    let mut out = finish(
        characteristics,
        units,
        names,
        &m1,
        &m2,
        Some(summaries),
        settings,
    )?;
    // Unit-level results: scores, apparent and holdout errors.
    let pooled = Pooled::new(&m1, &m2, characteristics)?;
    // `a = Sp⁻¹ (x̄2 − x̄1)`: a score grows toward the candidate; a unit goes to the candidate
    // when its score is above zero, to the reference otherwise.
    let a = DVector::from_vec(out.discriminant.coefficients.clone());
    // Reference − candidate: the direction the holdout count (`discriminant`) is written in,
    // and twice the reference mean's offset from the midpoint.
    let d = &m1.offset - &m2.offset;
    let half = &d * 0.5;
    let minus_half = -&half;
    let (s1, s2) = rayon::join(
        || discriminant::scores(&c1, &a, &half),
        || discriminant::scores(&c2, &a, &minus_half),
    );
    let apparent = [
        s1.iter().filter(|&&s| s > 0.0).count(),
        s2.iter().filter(|&&s| s <= 0.0).count(),
    ];
    out.discriminant.apparent_misclassified = Some(apparent);
    let scores = [s1, s2];
    out.discriminant.score_histogram = ScoreHistogram::new(&scores);
    out.discriminant.scores = Some(scores);
    if settings.leave_one_out {
        progress.report("leave-one-out", 0.3);
        let loo = discriminant::leave_one_out([&c1, &c2], &d, &pooled, |f| {
            progress.report("leave-one-out", 0.3 + 0.2 * f);
            !progress.cancelled()
        });
        if progress.cancelled() {
            return Err(EngineError::Cancelled);
        }
        if let Some(wrong) = loo {
            out.discriminant.leave_one_out_misclassified = Some(wrong);
            out.discriminant.leave_one_out_rate =
                Some((wrong[0] + wrong[1]) as f64 / (m1.n + m2.n) as f64);
        }
    }
    permute_centred(&mut out, [&c1, &c2], &d, settings, progress)?;
    if settings.checks {
        progress.report("assumption checks", 0.9);
        // The centred units are whitened in place: no further copy of them.
        unit_checks(&mut out, [c1, c2], settings.alpha, [&m1, &m2]);
        if progress.cancelled() {
            return Err(EngineError::Cancelled);
        }
    }
    conclude(&mut out);
    progress.report("done", 1.0);
    Ok(out)
}

fn permute_centred(
    out: &mut Comparison,
    centred: [&DMatrix<f64>; 2],
    d: &DVector<f64>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<(), EngineError> {
    permute_with(out, settings, progress, |keep_going| {
        permutation_test(
            centred,
            d,
            settings.permutations,
            settings.seed,
            settings.sequential.as_ref(),
            settings.alpha,
            keep_going,
        )
    })
}

/// Runs `test` (a permutation test with the settings' relabellings) with progress and
/// cancellation, and records its result and settings in `out`.
fn permute_with(
    out: &mut Comparison,
    settings: &Settings,
    progress: &dyn Progress,
    test: impl FnOnce(&(dyn Fn(f64) -> bool + Sync)) -> Option<PermutationResult>,
) -> Result<(), EngineError> {
    if settings.permutations == 0 {
        return Ok(());
    }
    progress.report("permutations", 0.5);
    let keep_going = |f: f64| {
        progress.report("permutations", 0.5 + 0.4 * f);
        !progress.cancelled()
    };
    out.permutation = test(&keep_going);
    if progress.cancelled() {
        return Err(EngineError::Cancelled);
    }
    out.settings.permutations = settings.permutations;
    out.settings.seed = settings.seed;
    out.settings.sequential = settings.sequential;
    Ok(())
}

/// Adds the permutation p-value (when `settings.permutations > 0`) to a comparison of the
/// same unit data, and updates the favoured test and the verdict. Split out so the window can
/// show a result first and the permutation p-value when it is ready; it centres the units
/// exactly as [`compare`] does, so the p-value is the same.
///
/// # Errors
/// Cancellation.
pub fn add_permutation(
    out: &mut Comparison,
    data: [&DMatrix<f64>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<(), EngineError> {
    if settings.permutations == 0 || data[0].nrows() == 0 {
        return Ok(());
    }
    let origin: DVector<f64> = data[0].row(0).transpose();
    let (m1, c1) = LotMoments::from_data_centred(data[0], &origin);
    let (m2, c2) = LotMoments::from_data_centred(data[1], &origin);
    let d = &m1.offset - &m2.offset;
    permute_centred(out, [&c1, &c2], &d, settings, progress)?;
    conclude(out);
    Ok(())
}

/// As [`add_permutation`], with unit matrices it may consume: they are centred in place (the
/// same arithmetic, so the same p-value), so memory holds them and the permutation test's own
/// copy, not a centred copy besides.
///
/// # Errors
/// Cancellation.
pub fn add_permutation_owned(
    out: &mut Comparison,
    data: [DMatrix<f64>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<(), EngineError> {
    if settings.permutations == 0 || data[0].nrows() == 0 {
        return Ok(());
    }
    let [mut x, mut y] = data;
    let origin: DVector<f64> = x.row(0).transpose();
    let m1 = LotMoments::centre_in_place(&mut x, &origin);
    let m2 = LotMoments::centre_in_place(&mut y, &origin);
    let d = &m1.offset - &m2.offset;
    permute_with(out, settings, progress, |keep_going| {
        crate::stats::permutation::permutation_test_owned(
            [x, y],
            &d,
            settings.permutations,
            settings.seed,
            settings.sequential.as_ref(),
            settings.alpha,
            keep_going,
        )
    })?;
    conclude(out);
    Ok(())
}

/// Mardia's tests, Shapiro–Wilk and the outlier screen: the checks that need unit data; with
/// outliers flagged, the T² test again without them.
fn unit_checks(
    out: &mut Comparison,
    centred: [DMatrix<f64>; 2],
    alpha: f64,
    moments: [&LotMoments; 2],
) {
    // The two lots' checks are independent: one on each core.
    let [c0, c1] = centred;
    let names = [out.lots[0].name.clone(), out.lots[1].name.clone()];
    let (first, second) = rayon::join(
        || lot_checks(0, &names[0], c0, &moments[0].ssp, alpha),
        || lot_checks(1, &names[1], c1, &moments[1].ssp, alpha),
    );
    let lots = [first, second];
    out.normality = (0..out.characteristics.len())
        .map(|k| NormalityRow {
            characteristic: out.characteristics[k].clone(),
            lots: [lots[0].shapiro[k], lots[1].shapiro[k]],
            large: [lots[0].large[k], lots[1].large[k]],
        })
        .collect();
    let mut cutoff = [f64::NAN; 2];
    let mut flagged = Vec::new();
    let mut removed: [Vec<DVector<f64>>; 2] = [Vec::new(), Vec::new()];
    for (g, lot) in lots.into_iter().enumerate() {
        if let Some(m) = lot.mardia {
            out.mardia.push(m);
        }
        cutoff[g] = lot.cutoff;
        flagged.extend(lot.outliers);
        removed[g] = lot.removed;
    }
    out.outliers = Some(OutlierReport {
        cutoff,
        units: flagged,
    });
    out.without_outliers = without(out, moments, &removed, alpha);
}

/// One lot's unit-level checks.
struct LotChecks {
    shapiro: Vec<Option<ShapiroWilk>>,
    large: Vec<Option<LargeLotNormality>>,
    mardia: Option<Mardia>,
    cutoff: f64,
    outliers: Vec<Outlier>,
    /// The flagged units' centred values, turned back from their whitened rows.
    removed: Vec<DVector<f64>>,
}

/// Shapiro–Wilk (or, above its range, Anderson–Darling and K²) per characteristic, then
/// Mardia's tests and the outlier screen on the whitened units of lot `g`.
fn lot_checks(
    g: usize,
    name: &str,
    mut c: DMatrix<f64>,
    ssp: &DMatrix<f64>,
    alpha: f64,
) -> LotChecks {
    let p = c.ncols();
    // Shapiro–Wilk is location-invariant: the centred columns serve (and it runs first,
    // before the whitening below changes them).
    // One task per characteristic: the sorts behind both tests dominate a big lot's checks.
    let (shapiro, large): (Vec<_>, Vec<_>) = {
        use rayon::prelude::*;
        (0..p)
            .into_par_iter()
            .map(|k| {
                let col = c.column(k);
                let col = col.as_slice();
                if col.len() > MAX_UNITS {
                    (None, large_lot_normality(col))
                } else {
                    (shapiro_wilk(col), None)
                }
            })
            .unzip()
    };
    let mut out = LotChecks {
        shapiro,
        large,
        mardia: None,
        cutoff: f64::NAN,
        outliers: Vec::new(),
        removed: Vec::new(),
    };
    // The lot's cross-products are those of these centred units: no pass to form them again.
    if let Some(w) = checks::whiten_with(&mut c, ssp) {
        out.mardia = Some(checks::mardia(name, &c));
        let (cut, units) = checks::outliers(g, &c, alpha);
        out.cutoff = cut;
        for u in &units {
            let z: Vec<f64> = c.row(u.unit).iter().copied().collect();
            out.removed.push(w.unwhiten(&z));
        }
        out.outliers = units;
    }
    out
}

/// The T² test once more without the flagged units, from the lots' moments with those units
/// taken out (`n' = n − k`; the kept units' centred mean `μ' = −Σ cᵢ / n'`, so the offset
/// becomes `offset + μ'` and `SSP' = SSP − Σ cᵢcᵢᵀ − n' μ'μ'ᵀ`): no second pass over the data.
fn without(
    out: &Comparison,
    moments: [&LotMoments; 2],
    removed: &[Vec<DVector<f64>>; 2],
    alpha: f64,
) -> Option<WithoutOutliers> {
    if removed.iter().all(Vec::is_empty) {
        return None;
    }
    let mut kept = Vec::with_capacity(2);
    for (m, r) in moments.iter().zip(removed) {
        let n = m.n.checked_sub(r.len())?;
        if n < 2 {
            return None;
        }
        let mut sum = DVector::zeros(m.dim());
        let mut ssp = m.ssp.clone();
        for c in r {
            sum += c;
            ssp -= c * c.transpose();
        }
        let mu = -sum / n as f64;
        ssp -= (&mu * mu.transpose()) * n as f64;
        kept.push(LotMoments {
            n,
            origin: m.origin.clone(),
            offset: &m.offset + &mu,
            ssp,
            spread_scale: m.spread_scale.clone(),
        });
    }
    let pooled = Pooled::new(&kept[0], &kept[1], &out.characteristics).ok()?;
    let test = hotelling::two_sample(&kept[0], &kept[1], &pooled, alpha);
    let differ = test.p_value < alpha;
    Some(WithoutOutliers {
        removed: [removed[0].len(), removed[1].len()],
        t2: test.t2,
        p_value: test.p_value,
        differ,
        same_decision: differ == out.hotelling.differ,
    })
}

/// Compares two lots from their moments as computed elsewhere (inside a database): the core
/// test, the intervals, the discriminant direction, Box's M and the unequal-covariance test;
/// `summaries` carry each characteristic's min and max (medians are not known). The unit
/// checks are the caller's to add ([`crate::analysis::conclude_again`]).
///
/// # Errors
/// As [`compare`].
pub fn compare_moments(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    moments: [&LotMoments; 2],
    summaries: Vec<[ColumnSummary; 2]>,
    settings: &Settings,
) -> Result<Comparison, EngineError> {
    let p = moments[0].dim();
    check_common(characteristics, p, moments[1].dim(), settings.alpha)?;
    for (m, name) in moments.iter().zip(names) {
        if m.n == 0 {
            return Err(EngineError::EmptyLot(name.to_string()));
        }
    }
    finish(
        characteristics,
        units,
        names,
        moments[0],
        moments[1],
        Some(summaries),
        settings,
    )
}

/// Compares two lots from published summary statistics only (n, mean vector, covariance).
///
/// # Errors
/// As [`compare`], plus malformed matrices.
pub fn compare_summaries(
    characteristics: &[String],
    units: &[Option<String>],
    lots: [&SummaryLot; 2],
    settings: &Settings,
) -> Result<Comparison, EngineError> {
    let p = lots[0].mean.len();
    check_common(characteristics, p, lots[1].mean.len(), settings.alpha)?;
    let mut moments = Vec::with_capacity(2);
    let origin = DVector::from_vec(lots[0].mean.clone());
    for lot in &lots {
        if lot.covariance.len() != p || lot.covariance.iter().any(|r| r.len() != p) {
            return Err(EngineError::DimensionMismatch(p, lot.covariance.len()));
        }
        if lot.n == 0 {
            return Err(EngineError::EmptyLot(lot.name.clone()));
        }
        let cov = DMatrix::from_fn(p, p, |i, j| {
            0.5 * (lot.covariance[i][j] + lot.covariance[j][i])
        });
        let mean = DVector::from_vec(lot.mean.clone());
        moments.push(LotMoments::from_summary(lot.n, &mean, &cov, &origin));
    }
    let summaries: Vec<[ColumnSummary; 2]> = (0..p)
        .map(|k| {
            let one = |m: &LotMoments, lot: &SummaryLot| ColumnSummary {
                n: m.n,
                mean: lot.mean[k],
                sd: lot.covariance[k][k].sqrt(),
                min: f64::NAN,
                median: f64::NAN,
                max: f64::NAN,
                decimals: None,
            };
            [one(&moments[0], lots[0]), one(&moments[1], lots[1])]
        })
        .collect();
    finish(
        characteristics,
        units,
        [&lots[0].name, &lots[1].name],
        &moments[0],
        &moments[1],
        Some(summaries),
        settings,
    )
}

fn finish(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    m1: &LotMoments,
    m2: &LotMoments,
    summaries: Option<Vec<[ColumnSummary; 2]>>,
    settings: &Settings,
) -> Result<Comparison, EngineError> {
    let p = m1.dim();
    let alpha = settings.alpha;
    let pooled = Pooled::new(m1, m2, characteristics)?;
    let test = hotelling::two_sample(m1, m2, &pooled, alpha);
    let sets = hotelling::intervals(m1, m2, &pooled, &test, alpha);
    let excludes = |iv: [f64; 2]| iv[0] > 0.0 || iv[1] < 0.0;
    let intervals: Vec<Interval> = sets
        .iter()
        .enumerate()
        .map(|(k, s)| Interval {
            characteristic: characteristics[k].clone(),
            difference: test.difference[k],
            standard_error: s.standard_error,
            simultaneous: s.simultaneous,
            bonferroni: s.bonferroni,
            one_at_a_time: s.one_at_a_time,
            excludes_zero: [
                excludes(s.simultaneous),
                excludes(s.bonferroni),
                excludes(s.one_at_a_time),
            ],
        })
        .collect();
    let summaries = summaries.unwrap_or_default();
    let per_characteristic: Vec<CharacteristicResult> = (0..p)
        .map(|k| {
            let u = hotelling::univariate(m1, m2, &pooled, k);
            CharacteristicResult {
                characteristic: characteristics[k].clone(),
                unit: units.get(k).cloned().flatten(),
                lots: summaries[k],
                difference: test.difference[k],
                pooled_sd: pooled.sd[k],
                standardized_difference: test.difference[k] / pooled.sd[k],
                pooled_t: u.pooled_t,
                pooled_df: u.pooled_df,
                pooled_p: u.pooled_p,
                welch_t: u.welch_t,
                welch_df: u.welch_df,
                welch_p: u.welch_p,
            }
        })
        .collect();
    let mut ranking: Vec<Contribution> = (0..p)
        .map(|k| Contribution {
            characteristic: characteristics[k].clone(),
            t2_drop: test.t2_drop[k],
            standardized_coefficient: test.standardized[k],
        })
        .collect();
    ranking.sort_by(|a, b| b.t2_drop.total_cmp(&a.t2_drop));
    let mean_total = |m: &LotMoments| -> f64 {
        let mean = m.mean();
        test.coefficients.dot(&mean)
    };
    let cutoff = 0.5 * (mean_total(m1) + mean_total(m2));
    let differ = test.p_value < alpha;
    let hot = HotellingResult {
        t2: test.t2,
        f: test.f,
        df1: test.df1,
        df2: test.df2,
        p_value: test.p_value,
        critical_t2: test.critical_t2,
        critical_f: test.critical_f,
        mahalanobis_d2: test.mahalanobis_d2,
        differ,
    };
    let mut warnings = Vec::new();
    if pooled.condition > CONDITION_WARN {
        let involved: Vec<String> = pooled
            .weakest
            .iter()
            .map(|&k| characteristics[k].clone())
            .collect();
        warnings.push(format!(
            "the pooled covariance is ill-conditioned (condition number {:.2e}, about {:.0} of \
             16 significant digits lost): {} are nearly collinear; consider leaving one out",
            pooled.condition,
            pooled.condition.log10(),
            quote_list(&involved)
        ));
    }
    let (box_m, unequal_covariance) = if settings.checks {
        (checks::box_m(m1, m2), checks::unequal_covariance(m1, m2))
    } else {
        (None, None)
    };
    let mut out = Comparison {
        settings: settings.clone(),
        characteristics: characteristics.to_vec(),
        units: units.to_vec(),
        lots: [
            LotResult {
                name: names[0].to_string(),
                n: m1.n,
                mean: m1.mean().iter().copied().collect(),
                covariance: rows_of(&m1.covariance()),
            },
            LotResult {
                name: names[1].to_string(),
                n: m2.n,
                mean: m2.mean().iter().copied().collect(),
                covariance: rows_of(&m2.covariance()),
            },
        ],
        pooled_covariance: rows_of(&pooled.covariance),
        condition_number: pooled.condition,
        hotelling: hot,
        intervals,
        discriminant: Discriminant {
            coefficients: test.coefficients.iter().copied().collect(),
            standardized: test.standardized.iter().copied().collect(),
            structure: test.structure.iter().copied().collect(),
            cutoff,
            apparent_misclassified: None,
            leave_one_out_misclassified: None,
            leave_one_out_rate: None,
            score_histogram: None,
            scores: None,
        },
        ranking,
        per_characteristic,
        box_m,
        mardia: Vec::new(),
        normality: Vec::new(),
        outliers: None,
        unequal_covariance,
        permutation: None,
        favoured: Favoured {
            test: FavouredTest::PooledT2,
            why: String::new(),
            p_value: f64::NAN,
        },
        verdict: String::new(),
        warnings,
        decision: None,
        not_compared: Vec::new(),
        input_alerts: Vec::new(),
        without_outliers: None,
        in_database: None,
        detectable: detectable_distance(p, m1.n, m2.n, alpha, DETECTABLE_POWER).map(|d| {
            Detectable {
                power: DETECTABLE_POWER,
                distance: d,
                per_characteristic_sd: test.structure.iter().map(|s| d * s).collect(),
            }
        }),
    };
    conclude(&mut out);
    Ok(out)
}

/// What screening the inputs found, for [`note_inputs`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct InputNotes {
    /// Numeric columns the lots did not line up on (a dropped column can change the result).
    pub not_compared: Vec<String>,
    /// Sentences that open the verdict (the same file for both lots).
    pub alerts: Vec<String>,
    /// Warnings shown with the result (repeated serial numbers, code-like columns).
    pub warnings: Vec<String>,
}

/// Adds what screening the inputs found: the verdict opens with the alerts and the columns
/// not compared; the warnings join the result's warnings.
pub fn note_inputs(c: &mut Comparison, notes: InputNotes) {
    c.not_compared = notes.not_compared;
    c.input_alerts = notes.alerts;
    c.warnings.extend(notes.warnings);
    conclude(c);
}

/// Applies a specification (limits, margins, margin rule) to a finished comparison: the
/// equivalence tests, capability, the fraction inside the limits and the four-way outcome
/// (see [`decision::assess`]); the verdict is rewritten to lead with the outcome.
/// `observed` holds the counts of units outside the limits ([`decision::observe`], taken on
/// the units as measured), absent for summary-statistics input.
///
/// # Errors
/// As [`decision::assess`].
pub fn apply_specification(
    c: &mut Comparison,
    given: &Specification,
    observed: Option<&Observed>,
) -> Result<(), DecisionError> {
    c.decision = Some(decision::assess(c, given, observed)?);
    conclude(c);
    Ok(())
}
