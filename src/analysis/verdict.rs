//! The result in plain words: the verdict, built from everything computed so far.

#[allow(unused_imports)]
use super::*;

/// Sets the favoured test and the verdict from everything computed so far. With a
/// specification, the four-way outcome comes first; without one the verdict is the T² result
/// alone (so records written before specifications existed still verify word for word).
pub(crate) fn conclude(c: &mut Comparison) {
    c.favoured = favour(c);
    let t2 = verdict_text(c);
    let verdict = match &c.decision {
        Some(d) => format!(
            "{} {t2}",
            decision::decision_text(d, [&c.lots[0].name, &c.lots[1].name])
        ),
        None => t2,
    };
    let mut opening: Vec<String> = c.input_alerts.clone();
    if !c.not_compared.is_empty() {
        let n = c.not_compared.len();
        opening.push(format!(
            "{n} numeric {} not compared: {}.",
            if n == 1 { "column was" } else { "columns were" },
            c.not_compared.join(", ")
        ));
    }
    opening.push(verdict);
    c.verdict = opening.join(" ");
}

/// "T² = …, F(df1, df2) = …, p = …" with `sig` significant digits.
pub fn test_statistics(h: &HotellingResult, sig: usize) -> String {
    format!(
        "T² = {}, F({}, {}) = {}, {}",
        format_sig(h.t2, sig),
        h.df1,
        h.df2,
        format_sig(h.f, sig),
        p_text(h.p_value)
    )
}

pub(crate) fn verdict_text(c: &Comparison) -> String {
    let h = &c.hotelling;
    let alpha = c.alpha();
    let stats = test_statistics(h, 4);
    let mut s = if h.differ {
        let leaders: Vec<String> = c
            .ranking
            .iter()
            .take(2)
            .filter(|r| r.t2_drop > 0.0)
            .map(|r| r.characteristic.clone())
            .collect();
        let flagged: Vec<String> = c
            .intervals
            .iter()
            .filter(|i| i.excludes_zero[0])
            .map(|i| i.characteristic.clone())
            .collect();
        let mut s = format!(
            "The lots differ at alpha {alpha}: {stats}. The shift is driven most by {}.",
            quote_list(&leaders)
        );
        if flagged.is_empty() {
            s.push_str(
                " No single characteristic's simultaneous interval excludes zero: the shift \
                 lies in a combination of characteristics.",
            );
        } else {
            s.push_str(&format!(
                " Simultaneous intervals exclude zero for {}.",
                quote_list(&flagged)
            ));
        }
        s
    } else {
        format!(
            "No difference between the lot means detected at alpha {alpha}: {stats}. This is \
             not proof that the lots are the same; see the intervals for the size of \
             difference the data can rule out."
        )
    };
    if let Some(w) = &c.without_outliers {
        let k = w.removed[0] + w.removed[1];
        s.push_str(&format!(
            " Without the {k} unit{} flagged as outliers, T² = {}, {}: the decision {}.",
            if k == 1 { "" } else { "s" },
            format_sig(w.t2, 4),
            p_text(w.p_value),
            if w.same_decision {
                "holds"
            } else {
                "changes; look at those units before deciding"
            }
        ));
    }
    let f = &c.favoured;
    if f.test != FavouredTest::PooledT2 && f.p_value.is_finite() {
        let differ = f.p_value < alpha;
        let interval = c.permutation.as_ref().and_then(|p| p.p_interval);
        let detail = match (f.test, &c.unequal_covariance) {
            (FavouredTest::UnequalCovariance, Some(u)) => format!(
                "F({}, {}) = {}, {}",
                u.df1,
                format_sig(u.df2, 4),
                format_sig(u.f, 4),
                p_text(u.p_value)
            ),
            // A sequential stop at one of Gandy's boundaries: p is known as an interval.
            (FavouredTest::Permutation, _) if interval.is_some() => {
                let [lo, hi] = interval.unwrap_or_default();
                format!("p between {} and {}", format_p(lo), format_p(hi))
            }
            _ => p_text(f.p_value),
        };
        s.push_str(&format!(
            " The assumption checks favour the {} ({detail}): by it the lots {} at alpha {alpha}.",
            f.test,
            if differ {
                "differ"
            } else {
                "do not differ detectably"
            }
        ));
        if differ != h.differ {
            s = format!(
                "The tests disagree at alpha {alpha}: the pooled T² says the lots {}, the {} \
                 says they {}; read the checks before deciding. {s}",
                if h.differ {
                    "differ"
                } else {
                    "do not differ detectably"
                },
                f.test,
                if differ {
                    "differ"
                } else {
                    "do not differ detectably"
                }
            );
        }
    }
    s
}
