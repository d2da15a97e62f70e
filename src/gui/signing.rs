//! The "Sign and export" form: the signer's printed name, the meaning of the signature, a
//! comment, the signing key and its passphrase (typed in a password field, kept only until the
//! key is opened, never stored). It signs the comparison shown, or adds a signature to a
//! signed summary or a comparison protocol chosen in a dialog (this needs no comparison: while
//! none is shown, "Add my signature…" in the main area opens the form). The form owns what is typed in it; reading, looking at and creating keys and
//! signing run as background jobs ([`super::jobs`]) that the form waits for without holding
//! up a frame, and their outcomes come back here ([`absorb`]).

use std::path::PathBuf;

use egui::RichText;

use crate::report::CAUTION;
use crate::report::sign::Meaning;

use super::action::Action;
use super::jobs::{AddJob, SignJob};
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
    /// The signer's comment, kept in the signature.
    pub comment: String,
    /// The passphrase of the key (or of the key to create); taken by the job that uses it.
    pub passphrase: String,
    /// Whether the key is protected by a passphrase (none: not known yet).
    pub protected: Option<bool>,
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
            comment: String::new(),
            passphrase: String::new(),
            protected: None,
        }
    }
}

/// The window of the form; its buttons ask for dialogs, the signature or closing.
pub fn form_ui(
    ctx: &egui::Context,
    form: &mut SignForm,
    result_shown: bool,
    actions: &mut Vec<Action>,
) {
    let mut open = true;
    let mut action = None;
    egui::Window::new("Sign and export the comparison")
        .open(&mut open)
        .collapsible(false)
        .resizable(false)
        .show(ctx, |ui| {
            ui.label("A signed summary holds the whole comparison record and the signatures in sequence: each one's printed name, time of signing (UTC), meaning and comment, and an Ed25519 signature over the record and every earlier signature, so a reviewer can check it with lotshift verify.");
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
            ui.horizontal(|ui| {
                let label = ui.label("comment");
                ui.text_edit_singleline(&mut form.comment).labelled_by(label.id);
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
            let asks = match form.key {
                KeyStatus::Missing => Some("passphrase for a new key (at least 8 characters)"),
                _ if form.protected == Some(true) => Some("passphrase of the key"),
                _ => None,
            };
            if let Some(what) = asks {
                ui.horizontal(|ui| {
                    let label = ui.label(what);
                    ui.add(egui::TextEdit::singleline(&mut form.passphrase).password(true))
                        .labelled_by(label.id);
                });
            }
            if form.protected == Some(false) && matches!(form.key, KeyStatus::Ready(_)) {
                ui.label(RichText::new("This key is not protected by a passphrase: anyone who copies the file can sign as you. It still signs; create a protected key and have it listed instead.").color(ui.visuals().warn_fg_color));
            }
            if let Some(p) = &form.problem {
                ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
            }
            ui.add_space(6.0);
            ui.horizontal(|ui| {
                let ready = matches!(form.key, KeyStatus::Ready(_)) && !form.signing;
                if ui
                    .add_enabled(ready && result_shown, egui::Button::new("Sign and save…"))
                    .on_disabled_hover_text("Run a comparison first to sign it; a signed summary or a protocol on disk takes your signature without one")
                    .clicked()
                {
                    action = Some(Action::Sign(None));
                }
                if ui
                    .add_enabled(ready, egui::Button::new("Add my signature to a file…"))
                    .on_hover_text("Open a signed summary or a comparison protocol whose signatures verify and add yours after them (authorship, review, approval); a summary is rewritten in place, a protocol's signatures are kept beside it in NAME.signatures.json")
                    .clicked()
                {
                    action = Some(Action::AddSignature(None));
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
    let passphrase = passphrase_for(form)?;
    let c = &shown.comparison;
    form.signing = true;
    Ok(SignJob {
        key: PathBuf::from(key),
        record: shown.record.clone(),
        signer: form.signer.trim().to_string(),
        meaning: form.meaning,
        comment: form.comment.trim().to_string(),
        passphrase,
        suggested_name: format!(
            "signed-comparison-{}-vs-{}.json",
            file_part(&c.lots[0].name),
            file_part(&c.lots[1].name)
        ),
        to,
    })
}

/// The passphrase typed for the key, taken from the form (none for a key known to be
/// unprotected).
fn passphrase_for(form: &mut SignForm) -> Result<Option<String>, String> {
    if form.protected == Some(false) {
        return Ok(None);
    }
    if form.passphrase.is_empty() {
        return match form.protected {
            Some(true) => Err("Type the passphrase of your key.".into()),
            _ => Ok(None),
        };
    }
    Ok(Some(std::mem::take(&mut form.passphrase)))
}

/// A signature to add to the signed summary at `summary`, with the form's name, meaning,
/// comment and the remembered key; marks the form as signing.
///
/// # Errors
/// No key remembered, no printed name, or no passphrase for a protected key.
pub fn add_job(form: &mut SignForm, saved: &Saved, summary: PathBuf) -> Result<AddJob, String> {
    let Some(key) = saved.signing_key.clone() else {
        return Err("Choose or create a signing key first.".into());
    };
    if form.signer.trim().is_empty() {
        return Err("Type your printed name.".into());
    }
    let passphrase = passphrase_for(form)?;
    form.signing = true;
    Ok(AddJob {
        key: PathBuf::from(key),
        passphrase,
        signer: form.signer.trim().to_string(),
        meaning: form.meaning,
        comment: form.comment.trim().to_string(),
        summary,
    })
}

/// The printed name a new key is made for, and the passphrase that protects it (taken from
/// the form).
///
/// # Errors
/// No name typed yet (it is stored with the key), or a passphrase too short.
pub fn key_folder_signer(form: Option<&mut SignForm>) -> Result<(String, String), String> {
    let Some(form) = form else {
        return Err("Type your printed name first: it is stored with the key.".into());
    };
    let name = form.signer.trim().to_string();
    if name.is_empty() {
        return Err("Type your printed name first: it is stored with the key.".into());
    }
    if form.passphrase.chars().count() < crate::report::sign::MIN_PASSPHRASE {
        return Err(format!(
            "Type a passphrase of at least {} characters first: it protects the new key and is never stored.",
            crate::report::sign::MIN_PASSPHRASE
        ));
    }
    Ok((name, std::mem::take(&mut form.passphrase)))
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
            protected,
        } => {
            if let Some(f) = form
                && f.key == KeyStatus::Checking(path.clone())
            {
                f.protected = protected;
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
        Outcome::KeyRead(Ok((path, signer, protected))) => {
            let path = path.display().to_string();
            if let Some(f) = form {
                f.protected = Some(protected);
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
                f.protected = Some(true);
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
        Outcome::SignatureAdded(Ok(note)) => {
            if let Some(f) = form {
                saved.signer_name = f.signer.clone();
            }
            *form = None;
            Some(Note::Notice(note))
        }
        Outcome::Signed(Err(e)) | Outcome::SignatureAdded(Err(e)) => {
            if let Some(f) = form {
                f.signing = false;
            }
            problem(form, e)
        }
        _ => None,
    }
}
