//! lotshift's integration tests, one crate with a module per topic (linking the program
//! once): published references and numpy/scipy/mpmath fixtures (`reference`, `equivalence`),
//! mathematical properties, simulations of the checks, loading and hostile files, the
//! command line (including every command line the README shows), specification and
//! decision safety, the record's schema, signing, and the headless window (`gui`).

mod common;

mod checks;
mod cli;
mod database;
mod decision;
mod equivalence;
#[cfg(feature = "gui")]
mod gui;
mod hostile;
mod loading;
mod properties;
mod record_schema;
mod reference;
mod sequential;
mod signing;
