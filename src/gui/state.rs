//! The window's state that is neither a view's nor a panel's: the views (tabs), what persists
//! between sessions, and the state of the result on screen.

use serde::{Deserialize, Serialize};

use crate::analysis::Settings;

use super::shown::Shown;

/// The views, one per tab.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum View {
    /// Verdict, test table, checks, caution.
    #[default]
    #[serde(alias = "Overview")]
    Verdict,
    /// Per-characteristic table.
    Characteristics,
    /// Interval chart.
    Intervals,
    /// Pairwise ellipses.
    Pairs,
    /// Discriminant direction.
    Direction,
    /// Specification limits and equivalence margins (an editor, not a result).
    Specification,
}

impl View {
    /// All views in tab order.
    pub const ALL: [View; 6] = [
        View::Verdict,
        View::Characteristics,
        View::Intervals,
        View::Pairs,
        View::Direction,
        View::Specification,
    ];

    /// Tab title.
    pub fn title(self) -> &'static str {
        match self {
            View::Verdict => "Verdict",
            View::Characteristics => "Characteristics",
            View::Intervals => "Intervals",
            View::Pairs => "Pairs",
            View::Direction => "Shift direction",
            View::Specification => "Specification",
        }
    }

    /// The view's command-line name (`--view NAME`): the tab title's last word, lower case.
    pub fn name(self) -> &'static str {
        match self {
            View::Verdict => "verdict",
            View::Characteristics => "characteristics",
            View::Intervals => "intervals",
            View::Pairs => "pairs",
            View::Direction => "direction",
            View::Specification => "specification",
        }
    }

    /// Parses a command-line view name.
    pub fn from_name(name: &str) -> Option<View> {
        let name = name.to_ascii_lowercase();
        View::ALL.into_iter().find(|v| v.name() == name)
    }
}

/// What persists between sessions. The views' own choices (`pair`, `pair_grid`,
/// `difference_shadow`, `table_sort`) live in the views' state while the window is open and
/// are copied here when it is saved, so the stored form stays what it was.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Saved {
    /// Analysis settings.
    pub settings: Settings,
    /// Coverage of the data ellipses.
    pub coverage: f64,
    /// Open view.
    pub view: View,
    /// Recently opened files, newest first.
    pub recent: Vec<String>,
    /// Pair shown in the ellipse view (characteristic names).
    pub pair: Option<[String; 2]>,
    /// Show the grid of all pairs.
    pub pair_grid: bool,
    /// Draw the mean-difference ellipse as the shadow of the full T² region (else pair alone).
    pub difference_shadow: bool,
    /// Sort of the characteristics table: column and whether ascending.
    pub table_sort: Option<(usize, bool)>,
    /// Where the user's private signing key is (its location only, never its content).
    pub signing_key: Option<String>,
    /// Printed name used for the last signature.
    pub signer_name: String,
    /// Database sources used recently, newest first: URL, query, lot column, lot values and
    /// the in-database switch. Never a password (URLs carrying one are refused).
    pub recent_sources: Vec<RecentSource>,
}

/// A database source as remembered between sessions (no password: the URL cannot hold one,
/// and the password field is never stored).
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct RecentSource {
    /// `sqlite:PATH` or `postgresql://user@host:port/db`.
    pub url: String,
    /// The SELECT whose rows are the units.
    pub query: String,
    /// The result's column holding each unit's lot.
    pub lot_column: String,
    /// Reference and candidate lot values, when given.
    pub lot_values: Option<[String; 2]>,
    /// Computed inside the database.
    pub in_database: bool,
}

impl Default for Saved {
    fn default() -> Self {
        Saved {
            settings: Settings::default(),
            coverage: 0.95,
            view: View::Verdict,
            recent: Vec::new(),
            pair: None,
            pair_grid: true,
            difference_shadow: true,
            table_sort: None,
            signing_key: None,
            signer_name: String::new(),
            recent_sources: Vec::new(),
        }
    }
}

/// Why the latest run gave no result.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Failure {
    /// The run failed or was cancelled: the reason in words.
    Run(String),
    /// No run started: a specification cell does not check (the problems in words). The run
    /// stays held until the specification checks.
    Held(String),
}

impl Failure {
    /// The reason in words.
    pub fn text(&self) -> &str {
        match self {
            Failure::Run(t) | Failure::Held(t) => t,
        }
    }
}

/// The result on screen and whether it is the one the current lots, selection, settings and
/// specification give. A result from an older run stays on screen until a newer one arrives.
pub enum ResultState {
    /// No result to show, with why the latest run gave none (if one was tried).
    Empty(Option<Failure>),
    /// A run is under way. The previous result (if any) stays on screen, marked as not
    /// current, and so does the reason the run before this one gave none.
    Running {
        /// The result of an earlier run.
        previous: Option<Box<Shown>>,
        /// Why the run before gave no result.
        failure: Option<Failure>,
    },
    /// The result of the latest run.
    Current(Box<Shown>),
    /// A result of an earlier run; the latest gave none, for this reason.
    Stale {
        /// The result of an earlier run.
        shown: Box<Shown>,
        /// Why the latest run gave no result.
        failure: Failure,
    },
}

impl Default for ResultState {
    fn default() -> Self {
        ResultState::Empty(None)
    }
}

impl ResultState {
    /// The result on screen, current or not.
    pub fn shown(&self) -> Option<&Shown> {
        match self {
            ResultState::Empty(_) => None,
            ResultState::Running { previous, .. } => previous.as_deref(),
            ResultState::Current(s) | ResultState::Stale { shown: s, .. } => Some(s),
        }
    }

    /// The result on screen, for the views (which fill their plot caches).
    pub fn shown_mut(&mut self) -> Option<&mut Shown> {
        match self {
            ResultState::Empty(_) => None,
            ResultState::Running { previous, .. } => previous.as_deref_mut(),
            ResultState::Current(s) | ResultState::Stale { shown: s, .. } => Some(s),
        }
    }

    /// The result, when it is the latest run's.
    pub fn current(&self) -> Option<&Shown> {
        match self {
            ResultState::Current(s) => Some(s),
            _ => None,
        }
    }

    /// The result on screen is the latest run's.
    pub fn is_current(&self) -> bool {
        matches!(self, ResultState::Current(_))
    }

    /// Why the latest run gave no result (while a run is under way: why the one before gave
    /// none).
    pub fn failure(&self) -> Option<&Failure> {
        match self {
            ResultState::Empty(f) | ResultState::Running { failure: f, .. } => f.as_ref(),
            ResultState::Stale { failure, .. } => Some(failure),
            ResultState::Current(_) => None,
        }
    }

    /// [`Self::failure`] in words.
    pub fn error(&self) -> Option<&str> {
        self.failure().map(Failure::text)
    }

    /// Runs are held because a specification cell does not check.
    pub fn is_held(&self) -> bool {
        matches!(
            self,
            ResultState::Empty(Some(Failure::Held(_)))
                | ResultState::Stale {
                    failure: Failure::Held(_),
                    ..
                }
        )
    }

    fn take(&mut self) -> (Option<Box<Shown>>, Option<Failure>) {
        match std::mem::take(self) {
            ResultState::Empty(f) => (None, f),
            ResultState::Running { previous, failure } => (previous, failure),
            ResultState::Current(s) => (Some(s), None),
            ResultState::Stale { shown, failure } => (Some(shown), Some(failure)),
        }
    }

    fn without(shown: Option<Box<Shown>>, failure: Failure) -> ResultState {
        match shown {
            Some(shown) => ResultState::Stale { shown, failure },
            None => ResultState::Empty(Some(failure)),
        }
    }

    /// A run starts: the result on screen stays, as not current.
    pub fn start(&mut self) {
        let (previous, failure) = self.take();
        *self = ResultState::Running { previous, failure };
    }

    /// No run starts, because the specification does not check (`why`).
    pub fn hold(&mut self, why: String) {
        let (shown, _) = self.take();
        *self = ResultState::without(shown, Failure::Held(why));
    }

    /// The run was cancelled (`why`): the result on screen stays, as not current.
    pub fn cancel(&mut self, why: String) {
        if self.is_held() {
            return;
        }
        let (shown, _) = self.take();
        *self = ResultState::without(shown, Failure::Run(why));
    }

    /// A run delivered its result, or why there is none. While runs are held, a result still
    /// arriving is shown as not current and a failure changes nothing: the specification
    /// problem stays the reason.
    pub fn arrive(&mut self, result: Result<Box<Shown>, String>) {
        let held = self.is_held();
        let (shown, failure) = self.take();
        *self = match (result, failure) {
            (Ok(s), Some(failure)) if held => ResultState::Stale { shown: s, failure },
            (Ok(s), _) => ResultState::Current(s),
            (Err(_), Some(failure)) if held => ResultState::without(shown, failure),
            (Err(e), _) => ResultState::without(shown, Failure::Run(e)),
        };
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Arc;

    use super::*;
    use crate::analysis::Silent;
    use crate::data::{self, LoadOptions, Selection};

    fn shown(alpha: f64) -> Box<Shown> {
        let load = |name: &str, text: &str| {
            Arc::new(data::load_bytes(name, text.as_bytes(), &LoadOptions::default()).unwrap())
        };
        let lots = [
            load("a.csv", "x,y\n1,2\n2,1\n3,5\n4,3\n5,4\n"),
            load("b.csv", "x,y\n2,2\n3,4\n4,3\n6,6\n5,7\n"),
        ];
        let settings = Settings {
            alpha,
            permutations: 0,
            ..Settings::default()
        };
        crate::gui::worker::run_comparison(&lots, &Selection::default(), &settings, &Silent)
            .unwrap()
    }

    fn alpha(r: &ResultState) -> Option<f64> {
        r.shown().map(|s| s.comparison.alpha())
    }

    #[test]
    fn a_result_stays_on_screen_until_a_newer_one_arrives() {
        let mut r = ResultState::default();
        r.start();
        r.arrive(Err("no characteristics".into()));
        assert_eq!(r.error(), Some("no characteristics"));
        assert!(r.shown().is_none());
        r.start();
        assert_eq!(r.error(), Some("no characteristics"), "kept while running");
        r.arrive(Ok(shown(0.05)));
        assert!(r.is_current() && r.error().is_none());
        r.start();
        assert!(!r.is_current());
        assert_eq!(alpha(&r), Some(0.05));
        r.arrive(Err("bad".into()));
        assert_eq!((alpha(&r), r.error()), (Some(0.05), Some("bad")));
        r.start();
        r.cancel("cancelled".into());
        assert_eq!((alpha(&r), r.error()), (Some(0.05), Some("cancelled")));
        r.arrive(Ok(shown(0.01)));
        assert!(r.is_current());
        assert_eq!(alpha(&r), Some(0.01));
    }

    #[test]
    fn a_held_run_stays_held_until_a_run_starts() {
        let mut r = ResultState::Current(shown(0.05));
        r.hold("the specification does not check".into());
        assert!(r.is_held() && !r.is_current());
        assert_eq!(alpha(&r), Some(0.05));
        // A result still on its way is shown, not current; a failure changes nothing.
        r.arrive(Ok(shown(0.01)));
        assert!(r.is_held() && !r.is_current());
        assert_eq!(alpha(&r), Some(0.01));
        r.arrive(Err("cancelled".into()));
        r.cancel("cancelled".into());
        assert_eq!(r.error(), Some("the specification does not check"));
        r.start();
        assert!(!r.is_held());
        r.arrive(Ok(shown(0.05)));
        assert!(r.is_current());
        let mut empty = ResultState::default();
        empty.hold("held".into());
        assert!(empty.is_held() && empty.shown().is_none());
    }
}
