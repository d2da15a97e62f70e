//! Pure statistics on matrices and summary statistics. Nothing here touches files, clocks
//! or the window.

pub mod bignormal;
pub mod blocked;
pub mod capability;
pub mod checks;
pub mod discriminant;
pub mod dist;
pub mod ellipse;
pub mod equivalence;
pub mod hotelling;
pub mod moments;
pub mod normality;
pub mod permutation;
pub mod power;
pub mod sort;

/// Why the engine could not compare two lots.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum EngineError {
    /// `n1 + n2 − 2 < p`: the pooled covariance cannot be of full rank.
    #[error(
        "too few units for {p} characteristics: the lots have {n1} and {n2} units, and the test \
         needs n1 + n2 - 2 >= {p}; measure more units or compare fewer characteristics"
    )]
    TooFewUnits {
        /// Units in the first lot.
        n1: usize,
        /// Units in the second lot.
        n2: usize,
        /// Characteristics.
        p: usize,
    },
    /// A characteristic does not vary within the lots.
    #[error(
        "{} does not vary within the lots (pooled standard deviation zero): leave {} out, or \
         check the gauge resolution",
        quote_list(names), if names.len() == 1 { "it" } else { "them" }
    )]
    Constant {
        /// The constant characteristics.
        names: Vec<String>,
    },
    /// The pooled covariance is singular or nearly so.
    #[error(
        "{} are collinear (one is almost exactly a combination of the others; condition number \
         {condition:.3e}): leave one of them out, or check that they are not the same \
         measurement in different units",
        quote_list(names)
    )]
    Collinear {
        /// The characteristics on the (nearly) degenerate direction, most involved first.
        names: Vec<String>,
        /// Condition number of the pooled correlation matrix.
        condition: f64,
    },
    /// Values so large that their squares do not fit in double precision.
    #[error(
        "{} {} values too large to compute with in double precision (their squares overflow): \
         rescale, for example by changing the unit",
        quote_list(names), if names.len() == 1 { "has" } else { "have" }
    )]
    Overflow {
        /// The characteristics involved.
        names: Vec<String>,
    },
    /// Spreads so small that their squares vanish in double precision.
    #[error(
        "the spread of {} is too small to compute with in double precision (its square \
         underflows to zero): rescale, for example by changing the unit",
        quote_list(names)
    )]
    Underflow {
        /// The characteristics involved.
        names: Vec<String>,
    },
    /// The two lots do not describe the same characteristics.
    #[error("the lots have {0} and {1} characteristics; they must have the same")]
    DimensionMismatch(usize, usize),
    /// Nothing to compare.
    #[error("no characteristics to compare")]
    NoCharacteristics,
    /// A lot has no units.
    #[error("lot \"{0}\" has no complete units to compare")]
    EmptyLot(String),
    /// Alpha outside (0, 1).
    #[error("alpha must lie strictly between 0 and 1 (got {0})")]
    BadAlpha(f64),
    /// The run was cancelled through its progress hook.
    #[error("cancelled")]
    Cancelled,
}

/// True for a number greater than zero (false for NaN).
pub fn positive(v: f64) -> bool {
    v > 0.0
}

/// `"a"`, `"a" and "b"`, `"a", "b" and "c"`.
pub fn quote_list(names: &[String]) -> String {
    let quoted: Vec<String> = names.iter().map(|n| format!("\"{n}\"")).collect();
    match quoted.len() {
        0 => String::new(),
        1 => quoted[0].clone(),
        k => format!("{} and {}", quoted[..k - 1].join(", "), quoted[k - 1]),
    }
}
