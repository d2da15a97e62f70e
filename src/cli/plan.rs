//! `plan`: power and units per lot of the T² test and of the equivalence tests.

#[allow(unused_imports)]
use super::*;

pub(super) fn plan(a: PlanArgs) -> CliResult {
    if !(a.alpha > 0.0 && a.alpha < 1.0) {
        return Err(CliError::from(format!(
            "alpha must lie strictly between 0 and 1 (got {})",
            a.alpha
        )));
    }
    if !(a.target_power > a.alpha && a.target_power < 1.0) {
        return Err(CliError::from(format!(
            "the target power must lie between alpha and 1 (got {})",
            a.target_power
        )));
    }
    if let Some(margin) = a.margin {
        return plan_tost(&a, margin);
    }
    let (p, delta2, source) = match (&a.from_summary, a.characteristics, a.distance) {
        (Some(file), _, _) => {
            let text =
                std::fs::read_to_string(file).map_err(|e| format!("{}: {e}", file.display()))?;
            let spec: StatsFile =
                serde_json::from_str(&text).map_err(|e| format!("{}: {e}", file.display()))?;
            let [l1, l2] = spec.lots.as_slice() else {
                return Err(CliError::from(format!(
                    "{}: \"lots\" must hold exactly two lots",
                    file.display()
                )));
            };
            let units = vec![None; spec.characteristics.len()];
            let settings = Settings {
                checks: false,
                permutations: 0,
                leave_one_out: false,
                ..Settings::default()
            };
            let c = analysis::compare_summaries(&spec.characteristics, &units, [l1, l2], &settings)
                .map_err(|e| format!("{}: {e}", file.display()))?;
            (
                spec.characteristics.len(),
                c.hotelling.mahalanobis_d2,
                format!("the shift and pooled covariance in {}", file.display()),
            )
        }
        (None, Some(p), Some(d)) if p > 0 && d >= 0.0 => {
            (p, d * d, format!("a shift of Mahalanobis distance {d}"))
        }
        _ => {
            return Err("give --characteristics P and --distance D, or --from-summary FILE".into());
        }
    };
    if let Some(eps) = a.equivalence_distance {
        return plan_t2_equivalence(&a, p, delta2.sqrt(), eps, &source);
    }
    outln!("Power of Hotelling's T² at alpha {} for {source}", a.alpha);
    outln!(
        "  (assumes multivariate normal lots with equal covariance matrices; the sampling plan \
         itself is set by your quality system)"
    );
    outln!("  characteristics            {p}");
    outln!(
        "  Mahalanobis distance       {}",
        format_sig(delta2.sqrt(), 4)
    );
    if let Some(n) = a.units {
        let pw = crate::stats::power::power(p, n, n, delta2, a.alpha);
        if pw.is_nan() {
            return Err(CliError::from(format!(
                "{n} units per lot are too few for {p} characteristics"
            )));
        }
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match crate::stats::power::units_per_lot(p, delta2, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(crate::stats::power::power(p, n, n, delta2, a.alpha), 4)
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}

/// `plan --equivalence-distance`: power and units per lot of the T² equivalence test.
fn plan_t2_equivalence(
    a: &PlanArgs,
    p: usize,
    delta: f64,
    epsilon: f64,
    source: &str,
) -> CliResult {
    use crate::stats::equivalence::{t2_equivalence_power, t2_equivalence_units_per_lot};
    if !(epsilon > 0.0 && epsilon.is_finite()) {
        return Err(CliError::from(format!(
            "--equivalence-distance must be a positive number (got {epsilon})"
        )));
    }
    if delta >= epsilon {
        return Err(CliError::from(format!(
            "the true distance {} must lie below the margin {epsilon}: at or beyond the margin \
             no lot size shows equivalence",
            format_sig(delta, 4)
        )));
    }
    outln!(
        "Power of the T² equivalence test at alpha {} for {source}, margin ε = {epsilon}",
        a.alpha
    );
    outln!(
        "  (assumes multivariate normal lots with equal covariance matrices; margins belong to \
         the quality plan, and the sampling plan itself is set by your quality system)"
    );
    outln!("  characteristics            {p}");
    outln!("  true distance assumed      {}", format_sig(delta, 4));
    if let Some(n) = a.units {
        let pw = t2_equivalence_power(p, n, n, delta, epsilon, a.alpha)
            .map_err(|e| format!("{n} units per lot: {e}"))?;
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match t2_equivalence_units_per_lot(p, delta, epsilon, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(
                t2_equivalence_power(p, n, n, delta, epsilon, a.alpha).unwrap_or(f64::NAN),
                4
            )
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}

/// `plan --margin`: power and units per lot of the two one-sided tests (pooled variance).
fn plan_tost(a: &PlanArgs, margin: f64) -> CliResult {
    use crate::stats::equivalence::{tost_power, tost_units_per_lot};
    let sd = a.sd.unwrap_or(f64::NAN);
    if !(margin > 0.0 && margin.is_finite() && sd > 0.0 && sd.is_finite()) {
        return Err(CliError::from(format!(
            "--margin and --sd must be positive numbers (got {margin} and {sd})"
        )));
    }
    let theta = a.difference;
    if theta.abs() >= margin {
        return Err(CliError::from(format!(
            "the true difference {theta} must lie inside the margin ±{margin}: at or beyond it \
             no lot size shows equivalence"
        )));
    }
    let m = [-margin, margin];
    outln!(
        "Power of the two one-sided tests at alpha {} for a margin of ±{margin}, SD {sd} and a \
         true difference of {theta}",
        a.alpha
    );
    outln!(
        "  (assumes normal lots with a common SD; margins belong to the quality plan, and the \
         sampling plan itself is set by your quality system)"
    );
    if let Some(n) = a.units {
        let pw = tost_power(theta, sd, n, n, m, a.alpha)
            .map_err(|e| format!("{n} units per lot: {e}"))?;
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match tost_units_per_lot(theta, sd, m, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(
                tost_power(theta, sd, n, n, m, a.alpha).unwrap_or(f64::NAN),
                4
            )
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}
