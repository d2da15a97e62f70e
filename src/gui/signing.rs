//! The "Sign and export" form: the signer's printed name, the meaning of the signature and the
//! signing key. The form owns what is typed in it; reading, looking at and creating keys and
//! signing run as background jobs ([`super::jobs`]) that the form waits for without holding
//! up a frame, and their outcomes come back here ([`absorb`]).

use std::path::PathBuf;

use egui::RichText;

use crate::report::CAUTION;
use crate::report::sign::Meaning;

use super::action::Action;
use super::jobs::SignJob;
use super::shown::Shown;
use super::state::Saved;
use super::words::file_part;
use super::worker::Outcome;

/// What the form knows of the remembered signing key.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum KeyStatus {
    /// No key yet (none remembered, or the remembered file is gone).
    Missing,
    /// A key is remembered at this path; a background job is looking whether it is there.
    Checking(String),
    /// The key at this path is there.
    Ready(String),
}

/// The "Sign and export" form.
#[derive(Debug, Clone)]
pub struct SignForm {
    /// Printed name of the signer.
    pub signer: String,
    /// Meaning of the signature.
    pub meaning: Meaning,
    /// Last problem, shown in the form.
    pub problem: Option<String>,
    /// The signing key.
    pub key: KeyStatus,
    /// A signature is being made in the background.
    pub signing: bool,
}

impl SignForm {
    /// A form for `signer`, with the key remembered at `key` (still to be looked at).
    pub fn new(signer: String, key: Option<String>) -> Self {
        SignForm {
            signer,
            meaning: Meaning::Review,
            problem: None,
            key: key.map_or(KeyStatus::Missing, KeyStatus::Checking),
            signing: false,
        }
    }
}

/// The window of the form; its buttons ask for dialogs, the signature or closing.
pub fn form_ui(ctx: &egui::Context, form: &mut SignForm, actions: &mut Vec<Action>) {
    let mut open = true;
    let mut action = None;
    egui::Window::new("Sign and export the comparison")
        .open(&mut open)
        .collapsible(false)
        .resizable(false)
        .show(ctx, |ui| {
            ui.label("A signed summary holds the whole comparison record and your signature: your printed name, the time of signing (UTC), the meaning of the signature, and an Ed25519 signature over it, so a reviewer can check it with lotshift verify.");
            ui.add_space(6.0);
            ui.horizontal(|ui| {
                let label = ui.label("printed name");
                ui.text_edit_singleline(&mut form.signer).labelled_by(label.id);
            });
            ui.horizontal(|ui| {
                ui.label("meaning");
                ui.radio_value(&mut form.meaning, Meaning::Review, "review");
                ui.radio_value(&mut form.meaning, Meaning::Approval, "approval");
                ui.radio_value(&mut form.meaning, Meaning::Authorship, "authorship");
            });
            match &form.key {
                KeyStatus::Ready(k) | KeyStatus::Checking(k) => {
                    ui.label(format!("signing key: {k}"));
                    if ui.small_button("Use another key…").clicked() {
                        action = Some(Action::PickSigningKey);
                    }
                }
                KeyStatus::Missing => {
                    ui.label("No signing key yet. Create one (stored in a folder you choose; lotshift remembers only where it is), or use an existing one.");
                    ui.horizontal(|ui| {
                        if ui.button("Create a key in a folder…").clicked() {
                            action = Some(Action::PickKeyFolder);
                        }
                        if ui.button("Use an existing key…").clicked() {
                            action = Some(Action::PickSigningKey);
                        }
                    });
                }
            }
            if let Some(p) = &form.problem {
                ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
            }
            ui.add_space(6.0);
            ui.horizontal(|ui| {
                let ready = matches!(form.key, KeyStatus::Ready(_)) && !form.signing;
                if ui.add_enabled(ready, egui::Button::new("Sign and save…")).clicked() {
                    action = Some(Action::Sign(None));
                }
                if ui.button("Cancel").clicked() {
                    action = Some(Action::CloseSigning);
                }
                if form.signing {
                    ui.spinner();
                    ui.label("signing…");
                }
            });
            ui.label(RichText::new(CAUTION).italics().small());
        });
    if action.is_some() {
        form.problem = None;
    }
    actions.extend(action);
    if !open {
        actions.push(Action::CloseSigning);
    }
}

/// What a signing outcome has to tell outside the form.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Note {
    /// A confirmation line.
    Notice(String),
    /// A message (a problem while the form is closed).
    Message(String),
}

/// The signature to make of `shown` with the form's name and meaning and the remembered key;
/// marks the form as signing.
///
/// # Errors
/// No key remembered, or no printed name typed: the problem, for the form.
pub fn sign_job(
    form: &mut SignForm,
    saved: &Saved,
    shown: &Shown,
    to: Option<PathBuf>,
) -> Result<SignJob, String> {
    let Some(key) = saved.signing_key.clone() else {
        return Err("Choose or create a signing key first.".into());
    };
    if form.signer.trim().is_empty() {
        return Err("Type your printed name.".into());
    }
    let c = &shown.comparison;
    form.signing = true;
    Ok(SignJob {
        key: PathBuf::from(key),
        record: shown.record.clone(),
        signer: form.signer.trim().to_string(),
        meaning: form.meaning,
        suggested_name: format!(
            "signed-comparison-{}-vs-{}.json",
            file_part(&c.lots[0].name),
            file_part(&c.lots[1].name)
        ),
        to,
    })
}

/// The printed name a new key is made for.
///
/// # Errors
/// None typed yet (it is stored with the key).
pub fn key_folder_signer(form: Option<&SignForm>) -> Result<String, String> {
    let name = form
        .map(|f| f.signer.trim().to_string())
        .unwrap_or_default();
    if name.is_empty() {
        return Err("Type your printed name first: it is stored with the key.".into());
    }
    Ok(name)
}

/// Applies an outcome of a key or signature job to the form (while open) and to the
/// remembered key and name; returns what to tell outside the form.
pub fn absorb(form: &mut Option<SignForm>, saved: &mut Saved, outcome: Outcome) -> Option<Note> {
    let problem = |form: &mut Option<SignForm>, why: String| match form {
        Some(f) => {
            f.problem = Some(why);
            None
        }
        None => Some(Note::Message(why)),
    };
    match outcome {
        Outcome::KeyLooked {
            path,
            exists,
            signer,
        } => {
            if let Some(f) = form
                && f.key == KeyStatus::Checking(path.clone())
            {
                f.key = if exists {
                    KeyStatus::Ready(path)
                } else {
                    KeyStatus::Missing
                };
                // The name beside the key, unless one was typed meanwhile.
                if let Some(name) = signer
                    && f.signer == saved.signer_name
                {
                    f.signer = name;
                }
            }
            None
        }
        Outcome::KeyRead(Ok((path, signer))) => {
            let path = path.display().to_string();
            if let Some(f) = form {
                if let Some(name) = signer {
                    f.signer = name;
                }
                f.key = KeyStatus::Ready(path.clone());
            }
            saved.signing_key = Some(path);
            None
        }
        Outcome::KeyCreated(Ok(p)) => {
            let path = p.display().to_string();
            if let Some(f) = form {
                f.key = KeyStatus::Ready(path.clone());
            }
            saved.signing_key = Some(path);
            Some(Note::Notice(format!(
                "Signing key created: {} (private, keep it to yourself) and its public half beside it for reviewers",
                p.display()
            )))
        }
        Outcome::KeyRead(Err(e)) | Outcome::KeyCreated(Err(e)) => problem(form, e),
        Outcome::Signed(Ok(signer)) => {
            saved.signer_name = signer;
            *form = None;
            None
        }
        Outcome::Signed(Err(e)) => {
            if let Some(f) = form {
                f.signing = false;
            }
            problem(form, e)
        }
        _ => None,
    }
}
