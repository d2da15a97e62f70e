//! The form that reads both lots from a database: the URL, the query, the lot column, the
//! two lot values (optional, reference first), whether to compare inside the database, and a
//! masked password. It draws from its own state and returns [`Action`]s; the app starts the
//! work in the background.
//!
//! The password typed here lives only in this form (and, for the re-runs of an in-database
//! comparison, in the app's memory): it is never written to the settings file, a message, the
//! record or a log, and the form's `Debug` shows it masked.

use egui::RichText;

use crate::source::{Database, PASSWORD_VAR, QuerySource};

use super::action::Action;
use super::state::RecentSource;

/// The form's state while the window is open.
#[derive(Default, Clone)]
pub struct DatabaseForm {
    /// The form is shown.
    pub open: bool,
    /// `sqlite:PATH` or `postgresql://user@host:port/db`.
    pub url: String,
    /// The SELECT whose rows are the units of both lots.
    pub query: String,
    /// The result's column holding each unit's lot.
    pub lot_column: String,
    /// Reference and candidate lot values (both empty: the first two values found).
    pub values: [String; 2],
    /// Compute the comparison inside the database.
    pub in_database: bool,
    /// The password, typed masked (empty: the environment variable, or none).
    pub password: String,
    /// Why the form cannot be run as filled in.
    pub problem: Option<String>,
}

impl std::fmt::Debug for DatabaseForm {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DatabaseForm")
            .field("open", &self.open)
            .field("url", &self.url)
            .field("query", &self.query)
            .field("lot_column", &self.lot_column)
            .field("values", &self.values)
            .field("in_database", &self.in_database)
            .field(
                "password",
                &if self.password.is_empty() {
                    ""
                } else {
                    "•••"
                },
            )
            .field("problem", &self.problem)
            .finish()
    }
}

impl DatabaseForm {
    /// The source the form names.
    ///
    /// # Errors
    /// A URL lotshift does not read (or one holding a password), an empty query or lot
    /// column, one lot value without the other, or the same value twice.
    pub fn source(&self) -> Result<QuerySource, String> {
        let database = Database::parse(&self.url).map_err(|e| e.to_string())?;
        let query = self.query.trim();
        if query.is_empty() {
            return Err("give the query: the SELECT whose rows are the units of both lots".into());
        }
        let lot_column = self.lot_column.trim();
        if lot_column.is_empty() {
            return Err("give the lot column: the result's column holding each unit's lot".into());
        }
        let [a, b] = [self.values[0].trim(), self.values[1].trim()];
        let lot_values = match (a.is_empty(), b.is_empty()) {
            (true, true) => None,
            (false, false) if a == b => {
                return Err(format!(
                    "the reference and candidate lot values are both \"{a}\"; give two \
                     different values"
                ));
            }
            (false, false) => Some([a.to_string(), b.to_string()]),
            _ => {
                return Err(
                    "give both lot values (reference, then candidate), or neither for the \
                     first two values found"
                        .into(),
                );
            }
        };
        Ok(QuerySource {
            database,
            query: query.to_string(),
            lot_column: lot_column.to_string(),
            lot_values,
        })
    }

    /// The password to pass on (none when the field is empty).
    pub fn password(&self) -> Option<String> {
        (!self.password.is_empty()).then(|| self.password.clone())
    }

    /// Fills the form from a remembered source (the password field is left as it is).
    pub fn fill(&mut self, r: &RecentSource) {
        self.url.clone_from(&r.url);
        self.query.clone_from(&r.query);
        self.lot_column.clone_from(&r.lot_column);
        self.values = r.lot_values.clone().unwrap_or_default();
        self.in_database = r.in_database;
        self.problem = None;
    }
}

/// The button that opens the form, at the top of the side panel (the top bar has no room
/// for one more button while a run shows its progress).
pub fn open_button_ui(ui: &mut egui::Ui, actions: &mut Vec<Action>) {
    if ui
        .button("Open from a database…")
        .on_hover_text(
            "Read both lots from a query's rows (SQLite or PostgreSQL), or compare them inside \
             the database",
        )
        .clicked()
    {
        actions.push(Action::OpenDatabaseForm);
    }
}

/// The database the lots on screen come from.
#[derive(Clone)]
pub struct ActiveSource {
    /// The database, query, lot column and values.
    pub source: QuerySource,
    /// The comparison is computed inside the database (else the rows were read as units).
    pub in_database: bool,
    /// The password typed for it, kept in memory for the re-runs of an in-database
    /// comparison only (never written anywhere).
    pub password: Option<String>,
    /// The characteristics of the first in-database comparison (all the query's numeric
    /// columns), for ticking.
    pub characteristics: Vec<(String, Option<String>)>,
}

impl ActiveSource {
    /// What is remembered of this source (never the password).
    pub fn remembered(&self) -> RecentSource {
        RecentSource {
            url: self.source.database.url().to_string(),
            query: self.source.query.clone(),
            lot_column: self.source.lot_column.clone(),
            lot_values: self.source.lot_values.clone(),
            in_database: self.in_database,
        }
    }
}

/// The side panel's box for an in-database comparison: the source, the lots as counted
/// there, and the characteristics to compare (a change re-runs the aggregate statements).
pub fn side_ui(
    ui: &mut egui::Ui,
    active: &ActiveSource,
    counted: Option<&[crate::source::aggregate::CountedLot; 2]>,
    excluded: &std::collections::BTreeSet<String>,
    actions: &mut Vec<Action>,
) {
    let s = &active.source;
    ui.strong("Lots compared inside the database");
    ui.label(s.database.url());
    ui.weak(crate::data::error_shorten(
        s.query.lines().next().unwrap_or_default(),
    ));
    for (g, role) in ["reference", "candidate"].iter().enumerate() {
        ui.horizontal(|ui| {
            super::widgets::lot_swatch(ui, g);
            match counted {
                Some(c) => ui.label(format!(
                    "{role}: {} = \"{}\", {} rows, {} units used",
                    s.lot_column, c[g].value, c[g].rows_read, c[g].n
                )),
                None => ui.label(format!("{role}: when the comparison is done")),
            };
        });
    }
    ui.separator();
    ui.strong("Characteristics to compare");
    let mut changed = false;
    for (name, unit) in &active.characteristics {
        let key = crate::data::match_key(name);
        let mut on = !excluded.contains(&key);
        let label = match unit {
            Some(u) => format!("{name} ({u})"),
            None => name.clone(),
        };
        if ui.checkbox(&mut on, label).changed() {
            actions.push(Action::SetCompared { key, compared: on });
            changed = true;
        }
    }
    if changed {
        actions.push(Action::Rerun);
    }
}

/// Puts `r` first in the list of recent sources (at most 10; the same URL, query and lot
/// column are one source).
pub fn remember(recent: &mut Vec<RecentSource>, r: RecentSource) {
    recent.retain(|x| !(x.url == r.url && x.query == r.query && x.lot_column == r.lot_column));
    recent.insert(0, r);
    recent.truncate(10);
}

/// A text field named `name` for screen readers (and the tests), beside its visible label.
fn named(ui: &mut egui::Ui, r: &egui::Response, name: &str) {
    ui.ctx()
        .accesskit_node_builder(r.id, |b| b.set_label(name.to_string()));
}

fn labelled_line(ui: &mut egui::Ui, label: &str, text: &mut String, hint: &str) {
    ui.horizontal(|ui| {
        ui.label(format!("{label}:"));
        let r = ui.add(
            egui::TextEdit::singleline(text)
                .id_salt(label)
                .hint_text(hint)
                .desired_width(420.0),
        );
        named(ui, &r, label);
    });
}

/// The form, as a window of its own. `busy`: a database is being read.
pub fn form_ui(
    ctx: &egui::Context,
    form: &mut DatabaseForm,
    recent: &[RecentSource],
    busy: bool,
    actions: &mut Vec<Action>,
) {
    let mut open = form.open;
    egui::Window::new("Lots from a database")
        .open(&mut open)
        .collapsible(false)
        .resizable(true)
        .default_width(560.0)
        .show(ctx, |ui| {
            if !recent.is_empty() {
                ui.menu_button("Used recently", |ui| {
                    for (k, r) in recent.iter().enumerate() {
                        let first = r.query.lines().next().unwrap_or_default();
                        if ui
                            .button(format!("{} — {}", r.url, crate::data::error_shorten(first)))
                            .clicked()
                        {
                            actions.push(Action::UseRecentSource(k));
                        }
                    }
                });
            }
            labelled_line(
                ui,
                "Database URL",
                &mut form.url,
                "sqlite:PATH or postgresql://user@host:port/db",
            );
            ui.label("Query (one SELECT; it runs read-only):");
            let r = ui.add(
                egui::TextEdit::multiline(&mut form.query)
                    .id_salt("Query")
                    .code_editor()
                    .desired_rows(5)
                    .desired_width(f32::INFINITY),
            );
            named(ui, &r, "Query");
            labelled_line(ui, "Lot column", &mut form.lot_column, "e.g. lot or route");
            labelled_line(
                ui,
                "Reference lot value",
                &mut form.values[0],
                "optional: the first value found",
            );
            labelled_line(
                ui,
                "Candidate lot value",
                &mut form.values[1],
                "optional: the second value found",
            );
            ui.checkbox(
                &mut form.in_database,
                "Compare inside the database (only the lots' summaries leave it)",
            )
            .on_hover_text(
                "For lots too big to read: n, means and covariances are computed by aggregate \
                 statements in the database. Plots of single units, permutations, the \
                 held-out error rate and Shapiro–Wilk are then not computed.",
            );
            ui.horizontal(|ui| {
                ui.label("Password:");
                let r = ui.add(
                    egui::TextEdit::singleline(&mut form.password)
                        .id_salt("Password")
                        .password(true)
                        .desired_width(200.0),
                );
                named(ui, &r, "Password");
            });
            ui.weak(format!(
                "The password is used for this session only and never saved; left empty, the \
                 environment variable {PASSWORD_VAR} is used."
            ));
            if let Some(p) = &form.problem {
                ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
            }
            ui.horizontal(|ui| {
                let run = if form.in_database {
                    "Compare in the database"
                } else {
                    "Read the lots"
                };
                if ui.add_enabled(!busy, egui::Button::new(run)).clicked() {
                    actions.push(Action::RunDatabase);
                }
                if busy {
                    ui.spinner();
                    ui.label("reading the database…");
                }
            });
        });
    if !open {
        actions.push(Action::CloseDatabaseForm);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn form() -> DatabaseForm {
        DatabaseForm {
            url: "sqlite:lots.sqlite".into(),
            query: "SELECT * FROM t".into(),
            lot_column: "lot".into(),
            password: "s3cret-pw".into(),
            ..DatabaseForm::default()
        }
    }

    #[test]
    fn the_form_names_a_source_or_says_what_to_fix() {
        let mut f = form();
        let s = f.source().unwrap();
        assert_eq!(s.lot_values, None);
        f.values = ["A".into(), String::new()];
        assert!(f.source().unwrap_err().contains("both lot values"));
        f.values = ["A".into(), "A".into()];
        assert!(f.source().unwrap_err().contains("two different values"));
        f.values = [" A ".into(), "B".into()];
        assert_eq!(
            f.source().unwrap().lot_values,
            Some(["A".into(), "B".into()])
        );
        f.url = "postgresql://me:pw@host/db".into();
        assert!(f.source().unwrap_err().contains("holds a password"));
        f.url = "sqlite:x".into();
        f.query = "  ".into();
        assert!(f.source().unwrap_err().contains("query"));
    }

    #[test]
    fn the_password_is_neither_remembered_nor_shown() {
        let f = form();
        let active = ActiveSource {
            source: f.source().unwrap(),
            in_database: true,
            password: f.password(),
            characteristics: Vec::new(),
        };
        let r = active.remembered();
        let json = serde_json::to_string(&r).unwrap();
        assert!(!json.contains("s3cret-pw"), "{json}");
        assert!(!format!("{f:?}").contains("s3cret-pw"));
    }
}
