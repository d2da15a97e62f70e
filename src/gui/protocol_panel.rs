//! Running under a comparison protocol in the window: what the protocol fixes, how the next
//! run differs from it, and the reason the user gives for each difference (a deviation). The
//! panel draws from borrowed state and returns [`Action`]s; the reason being typed is its own
//! state.

use egui::RichText;

use crate::protocol::Protocol;
use crate::report::Deviation;

use super::action::Action;

/// A protocol loaded in the window.
#[derive(Debug, Clone)]
pub struct ProtocolState {
    /// The protocol.
    pub protocol: Protocol,
    /// Differences accepted as deviations, with their reasons.
    pub accepted: Vec<Deviation>,
    /// Differences of the run asked for that have no reason yet: the run waits.
    pub pending: Vec<(String, String, String)>,
    /// The deviations of the run under way (recorded with its result).
    pub running: Vec<Deviation>,
    /// The characteristics to tick once the protocol's lots are in.
    pub ticks_pending: bool,
    /// The reason being typed.
    pub reason: String,
}

impl ProtocolState {
    /// A protocol just loaded: nothing accepted, its ticks still to apply.
    pub fn new(protocol: Protocol) -> Self {
        ProtocolState {
            protocol,
            accepted: Vec::new(),
            pending: Vec::new(),
            running: Vec::new(),
            ticks_pending: true,
            reason: String::new(),
        }
    }

    /// Splits the differences of a run asked for into the deviations already accepted and
    /// the ones still without a reason (kept in `pending`); returns the accepted ones when
    /// none is pending.
    pub fn settle(&mut self, found: Vec<(String, String, String)>) -> Option<Vec<Deviation>> {
        let mut ok = Vec::new();
        self.pending.clear();
        for (what, protocol, used) in found {
            match self
                .accepted
                .iter()
                .find(|d| d.what == what && d.protocol == protocol && d.used == used)
            {
                Some(d) => ok.push(d.clone()),
                None => self.pending.push((what, protocol, used)),
            }
        }
        self.pending.is_empty().then_some(ok)
    }

    /// Accepts every pending difference with `reason`.
    pub fn accept(&mut self, reason: &str) {
        for (what, protocol, used) in std::mem::take(&mut self.pending) {
            self.accepted.retain(|d| d.what != what);
            self.accepted.push(Deviation {
                what,
                protocol,
                used,
                reason: reason.trim().to_string(),
            });
        }
    }
}

/// The protocol line above the views, and, when the run asked for differs from it, the
/// differences with a field for the reason.
pub fn protocol_ui(ui: &mut egui::Ui, state: &mut ProtocolState, actions: &mut Vec<Action>) {
    let p = &state.protocol;
    ui.horizontal_wrapped(|ui| {
        ui.strong("Protocol:");
        ui.label(format!(
            "{}{} (SHA-256 {}…)",
            p.path
                .file_name()
                .map_or_else(String::new, |n| n.to_string_lossy().into_owned()),
            p.file
                .title
                .as_ref()
                .map(|t| format!(", “{t}”"))
                .unwrap_or_default(),
            &p.sha256[..12]
        ));
        ui.label(match state.running.len() {
            0 => "— run as fixed".to_string(),
            1 => "— 1 deviation recorded".to_string(),
            n => format!("— {n} deviations recorded"),
        });
        if ui
            .small_button("close protocol")
            .on_hover_text("Stop running under the protocol (the settings stay as they are)")
            .clicked()
        {
            actions.push(Action::CloseProtocol);
        }
    });
    if p.signatures.is_empty() {
        ui.label(
            RichText::new(
                "The protocol is not signed: nobody's authorship, review or approval of it is recorded.",
            )
            .color(ui.visuals().warn_fg_color),
        );
    } else {
        let who: Vec<String> = p
            .signatures
            .iter()
            .map(|s| format!("{} by {} on {} (UTC)", s.meaning, s.signer, s.signed_at))
            .collect();
        ui.label(format!(
            "Protocol signed: {}. Whether the signers are trusted is checked by lotshift verify --trusted.",
            who.join("; ")
        ));
    }
    for d in &state.running {
        ui.label(format!("  deviation: {} — {}", d.describe(), d.reason));
    }
    if state.pending.is_empty() {
        return;
    }
    egui::Frame::group(ui.style()).show(ui, |ui| {
        ui.label(
            RichText::new("This comparison differs from the protocol:")
                .strong()
                .color(ui.visuals().warn_fg_color),
        );
        for (what, protocol, used) in &state.pending {
            ui.label(format!("  {what}: {used} (protocol: {protocol})"));
        }
        ui.label(
            "Give the reason to run it so: each difference is recorded as a deviation in the \
             record and the report. Or change it back.",
        );
        ui.horizontal(|ui| {
            ui.add(
                egui::TextEdit::singleline(&mut state.reason)
                    .hint_text("reason for the deviation")
                    .desired_width(360.0),
            );
            let ready = !state.reason.trim().is_empty();
            if ui
                .add_enabled(ready, egui::Button::new("Record the deviation and compare"))
                .on_disabled_hover_text("Type the reason first: it is recorded")
                .clicked()
            {
                actions.push(Action::AcceptDeviations(state.reason.trim().to_string()));
            }
        });
    });
}
