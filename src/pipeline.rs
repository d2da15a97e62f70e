//! The one pipeline every shell runs: lots → matched unit matrices → comparison → decision.
//! The command line's `compare` and `verify` and the window's worker call these functions, so
//! a number cannot depend on which of them produced it.

use std::sync::Arc;

use nalgebra::DMatrix;

use crate::analysis::decision::{self, DecisionError, MarginRule, Observed, Specification};
use crate::analysis::{self, Comparison, Progress, Settings};
use crate::data::exclusions::{self, Exclusion};
use crate::data::spec::Spec;
use crate::data::{self, LoadError, Lot, PrepareError, Prepared, Selection};
use crate::stats::EngineError;

/// What the quality plan adds to a comparison: a specification file, a margin rule and a
/// margin on the distance between the lot means. All optional; an empty request changes
/// nothing.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SpecRequest {
    /// The specification file as read.
    pub file: Option<Spec>,
    /// Margins for characteristics the file gives none.
    pub rule: MarginRule,
    /// Margin ε on the Mahalanobis distance between the lot means.
    pub distance_margin: Option<f64>,
    /// A specification already lined up with the characteristics (read back from a record
    /// by `verify`); used as given, in place of the three fields above.
    pub recorded: Option<Specification>,
}

impl SpecRequest {
    /// True when the request asks for nothing.
    pub fn is_empty(&self) -> bool {
        self.file.is_none()
            && self.rule == MarginRule::FileOnly
            && self.distance_margin.is_none()
            && self.recorded.is_none()
    }

    /// The specification for the compared characteristics.
    ///
    /// # Errors
    /// A specification row naming a characteristic that is not compared, a unit that
    /// disagrees with the lot files, or a bad rule factor.
    pub fn specification(
        &self,
        characteristics: &[String],
        units: &[Option<String>],
    ) -> Result<Specification, PipelineError> {
        if let Some(r) = &self.recorded {
            return Ok(r.as_given());
        }
        decision::check_rule(self.rule)?;
        let mut s = match &self.file {
            Some(file) => {
                let aligned = file.align(characteristics, units)?;
                Specification::from_file(characteristics, file, &aligned)
            }
            None => Specification::empty(characteristics),
        };
        s.rule = self.rule;
        s.distance_margin = self.distance_margin;
        Ok(s)
    }
}

/// What the pipeline needs besides the lots.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Request {
    /// Which characteristics to compare.
    pub selection: Selection,
    /// Engine settings.
    pub settings: Settings,
    /// Specification, margins.
    pub spec: SpecRequest,
    /// Every numeric column must be compared: an unmatched one is an error.
    pub strict_columns: bool,
    /// Units set aside with a reason ([`data::exclusions`]); the lots as read stay whole.
    pub exclusions: Vec<Exclusion>,
}

/// Refuses lots that do not line up when every column must be compared.
fn check_strict(request: &Request, prepared: &Prepared) -> Result<(), PipelineError> {
    let missing = prepared.not_compared();
    if request.strict_columns && !missing.is_empty() {
        return Err(PrepareError::NotCompared {
            count: missing.len(),
            list: missing.join(", "),
        }
        .into());
    }
    Ok(())
}

/// Why the pipeline stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PipelineError {
    /// The lots' columns do not line up.
    #[error(transparent)]
    Prepare(#[from] PrepareError),
    /// The specification does not fit the compared characteristics.
    #[error(transparent)]
    Spec(#[from] LoadError),
    /// The engine could not compare.
    #[error(transparent)]
    Engine(#[from] EngineError),
    /// The specification could not be applied.
    #[error("specification: {0}")]
    Decision(#[from] DecisionError),
    /// A unit set aside is not in its lot.
    #[error("{0}")]
    Exclusion(String),
}

/// Screens the lots and the matched columns for mistakes ([`data::screen`]).
fn screen(lots: [&Lot; 2], prepared: &Prepared) -> analysis::InputNotes {
    let same = data::screen::same_file(lots[0], lots[1]);
    analysis::InputNotes {
        not_compared: prepared.not_compared(),
        warnings: data::screen::repeated_identifiers(lots, same.is_none())
            .into_iter()
            .chain(data::screen::code_like(prepared))
            .collect(),
        alerts: same.into_iter().collect(),
    }
}

fn specification_and_counts(
    request: &Request,
    prepared: &Prepared,
) -> Result<Option<(Specification, Observed)>, PipelineError> {
    if request.spec.is_empty() {
        return Ok(None);
    }
    let spec = request
        .spec
        .specification(&prepared.characteristics, &prepared.units)?;
    let observed = decision::observe(&spec, [&prepared.lots[0].data, &prepared.lots[1].data]);
    Ok(Some((spec, observed)))
}

/// Compares two lots the caller gives up: their number columns move into the unit matrices
/// and the engine centres those in place, so memory holds one copy of the units (the
/// command line's path, for big lots).
///
/// # Errors
/// Unmatched columns, a specification that does not fit, or an engine error.
pub fn run_owned(
    lots: &mut [Lot; 2],
    request: &Request,
    progress: &dyn Progress,
) -> Result<(Prepared, Comparison), PipelineError> {
    if !request.exclusions.is_empty() {
        *lots = exclusions::apply([&lots[0], &lots[1]], &request.exclusions)
            .map_err(PipelineError::Exclusion)?;
    }
    let mut prepared = data::prepare_releasing(lots, &request.selection)?;
    prepared.exclusions = request.exclusions.clone();
    check_strict(request, &prepared)?;
    let c = run_prepared_owned(
        [&lots[0], &lots[1]],
        &mut prepared,
        [&[], &[]],
        request,
        &request.settings,
        progress,
    )?;
    Ok((prepared, c))
}

/// As [`run_prepared`], with the unit matrices given up to the engine, which centres them in
/// place (no copy of the units): the specification counts and the input notes are taken from
/// every unit first, then `prepared` keeps only the rows `keep` of each lot, in that order
/// (the units the window draws). The numbers equal [`run_prepared`]'s to the last bit.
///
/// # Errors
/// As [`run_prepared`].
pub fn run_prepared_owned(
    lots: [&Lot; 2],
    prepared: &mut Prepared,
    keep: [&[usize]; 2],
    request: &Request,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, PipelineError> {
    let spec = specification_and_counts(request, prepared)?;
    let notes = screen(lots, prepared);
    let units = [0, 1].map(|g| {
        let data = &prepared.lots[g].data;
        let kept = DMatrix::from_fn(keep[g].len(), data.ncols(), |r, k| data[(keep[g][r], k)]);
        std::mem::replace(&mut prepared.lots[g].data, kept)
    });
    let names = [prepared.lots[0].name.clone(), prepared.lots[1].name.clone()];
    let mut c = analysis::compare_owned(
        &prepared.characteristics,
        &prepared.units,
        [&names[0], &names[1]],
        units,
        settings,
        progress,
    )?;
    if let Some((s, observed)) = spec {
        analysis::apply_specification(&mut c, &s, Some(&observed))?;
    }
    analysis::note_inputs(&mut c, notes);
    Ok(c)
}

/// Matches the lots' columns, keeping the lots as they are (the window's path: the lots stay
/// loaded for the next run).
///
/// # Errors
/// Unmatched columns, or a unit set aside that is not in its lot.
pub fn prepare_shared(lots: &[Arc<Lot>; 2], request: &Request) -> Result<Prepared, PipelineError> {
    let prepared = if request.exclusions.is_empty() {
        data::prepare(&lots[0], &lots[1], &request.selection)?
    } else {
        // Prepare the units kept, then point each kept unit back at its place in the lot as
        // read (the lots stay whole for the next run; labels and rows come from them).
        let both = [lots[0].as_ref(), lots[1].as_ref()];
        let keep =
            exclusions::kept_units(both, &request.exclusions).map_err(PipelineError::Exclusion)?;
        let kept = [
            lots[0].select_units(&keep[0]),
            lots[1].select_units(&keep[1]),
        ];
        let mut prepared = data::prepare(&kept[0], &kept[1], &request.selection)?;
        for (pl, keep) in prepared.lots.iter_mut().zip(&keep) {
            for k in &mut pl.kept {
                *k = keep[*k];
            }
        }
        prepared.exclusions = request.exclusions.clone();
        prepared
    };
    check_strict(request, &prepared)?;
    Ok(prepared)
}

/// Compares prepared lots without consuming them, with `settings` in place of the request's
/// (the window first runs without permutations, then adds them with
/// [`analysis::add_permutation`]).
///
/// # Errors
/// A specification that does not fit, or an engine error.
pub fn run_prepared(
    lots: &[Arc<Lot>; 2],
    prepared: &Prepared,
    request: &Request,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, PipelineError> {
    let spec = specification_and_counts(request, prepared)?;
    let mut c = analysis::compare(
        &prepared.characteristics,
        &prepared.units,
        [
            analysis::LotData {
                name: &prepared.lots[0].name,
                data: &prepared.lots[0].data,
            },
            analysis::LotData {
                name: &prepared.lots[1].name,
                data: &prepared.lots[1].data,
            },
        ],
        settings,
        progress,
    )?;
    if let Some((s, observed)) = spec {
        analysis::apply_specification(&mut c, &s, Some(&observed))?;
    }
    analysis::note_inputs(&mut c, screen([&lots[0], &lots[1]], prepared));
    Ok(c)
}
