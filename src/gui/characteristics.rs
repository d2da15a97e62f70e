//! The per-characteristic table: both lots side by side, the difference and the univariate
//! tests; sortable, and copyable as tab-separated text for a spreadsheet. With specification
//! limits, each lot's capability below it.

use egui::RichText;

use crate::analysis::decision::{CapabilityLot, SpecEntry};
use crate::analysis::{format_confidence, format_p, format_sig};
use crate::format::format_measure;

use super::action::Action;
use super::shown::Shown;
use super::theme::{lot_colors, lot_filled};
use super::widgets::swatch;
use super::words::observed_words;

const HEADERS: [&str; 17] = [
    "characteristic",
    "unit",
    "n ref",
    "mean ref",
    "sd ref",
    "min ref",
    "max ref",
    "n cand",
    "mean cand",
    "sd cand",
    "cand − ref",
    "std. difference",
    "pooled t",
    "p (pooled t)",
    "p (Welch)",
    "Shapiro–Wilk p ref",
    "Shapiro–Wilk p cand",
];

fn shapiro_p(s: &Shown, k: usize, g: usize) -> f64 {
    s.comparison
        .normality
        .get(k)
        .and_then(|r| r.lots[g])
        .map_or(f64::NAN, |t| t.p_value)
}

fn sort_key(s: &Shown, k: usize, col: usize) -> f64 {
    let r = &s.comparison.per_characteristic[k];
    match col {
        15 => shapiro_p(s, k, 0),
        16 => shapiro_p(s, k, 1),
        2 => r.lots[0].n as f64,
        3 => r.lots[0].mean,
        4 => r.lots[0].sd,
        5 => r.lots[0].min,
        6 => r.lots[0].max,
        7 => r.lots[1].n as f64,
        8 => r.lots[1].mean,
        9 => r.lots[1].sd,
        10 => r.difference,
        11 => r.standardized_difference,
        12 => r.pooled_t,
        13 => r.pooled_p,
        14 => r.welch_p,
        _ => 0.0,
    }
}

fn cells(s: &Shown, k: usize) -> [String; 17] {
    let r = &s.comparison.per_characteristic[k];
    let decimals = crate::stats::moments::finer_decimals(r.lots[0].decimals, r.lots[1].decimals);
    let sw = |g: usize| {
        let p = shapiro_p(s, k, g);
        if p.is_nan() {
            "n/a".to_string()
        } else {
            format_p(p)
        }
    };
    [
        r.characteristic.clone(),
        r.unit.clone().unwrap_or_default(),
        r.lots[0].n.to_string(),
        format_measure(r.lots[0].mean, decimals),
        format_sig(r.lots[0].sd, 4),
        format_sig(r.lots[0].min, 7),
        format_sig(r.lots[0].max, 7),
        r.lots[1].n.to_string(),
        format_measure(r.lots[1].mean, decimals),
        format_sig(r.lots[1].sd, 4),
        format_sig(r.difference, 4),
        format_sig(r.standardized_difference, 3),
        format_sig(r.pooled_t, 4),
        format_p(r.pooled_p),
        format_p(r.welch_p),
        sw(0),
        sw(1),
    ]
}

/// The table as tab-separated text with full precision numbers, header first.
pub fn table_tsv(s: &Shown) -> String {
    let mut out = HEADERS.join("\t");
    out.push('\n');
    for (k, r) in s.comparison.per_characteristic.iter().enumerate() {
        let row = [
            r.characteristic.clone(),
            r.unit.clone().unwrap_or_default(),
            r.lots[0].n.to_string(),
            r.lots[0].mean.to_string(),
            r.lots[0].sd.to_string(),
            r.lots[0].min.to_string(),
            r.lots[0].max.to_string(),
            r.lots[1].n.to_string(),
            r.lots[1].mean.to_string(),
            r.lots[1].sd.to_string(),
            r.difference.to_string(),
            r.standardized_difference.to_string(),
            r.pooled_t.to_string(),
            r.pooled_p.to_string(),
            r.welch_p.to_string(),
            shapiro_p(s, k, 0).to_string(),
            shapiro_p(s, k, 1).to_string(),
        ];
        out.push_str(&row.join("\t"));
        out.push('\n');
    }
    out
}

/// The table view's own state: how the table is sorted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct TableState {
    /// Column sorted by, and whether ascending.
    pub sort: Option<(usize, bool)>,
}

impl TableState {
    /// Sorts by column `k`, ascending; by the same column again, the other way.
    pub fn sort_by(&mut self, k: usize) {
        self.sort = match self.sort {
            Some((c, asc)) if c == k => Some((k, !asc)),
            _ => Some((k, true)),
        };
    }
}

/// Draws the table view; a click on a column title asks for that sort.
pub fn table_ui(ui: &mut egui::Ui, s: &mut Shown, state: &TableState, actions: &mut Vec<Action>) {
    ui.horizontal(|ui| {
        if ui
            .button("Copy table")
            .on_hover_text("Copy as tab-separated text, full precision, to paste into a spreadsheet")
            .clicked()
        {
            ui.ctx().copy_text(table_tsv(s));
        }
        ui.weak("Click a column title to sort. Difference = candidate minus reference; p-values are one characteristic at a time.");
    });
    let mut order: Vec<usize> = (0..s.comparison.per_characteristic.len()).collect();
    if let Some((col, asc)) = state.sort {
        let rows = &s.comparison.per_characteristic;
        order.sort_by(|&a, &b| {
            let o = if col == 0 {
                rows[a].characteristic.cmp(&rows[b].characteristic)
            } else {
                sort_key(s, a, col).total_cmp(&sort_key(s, b, col))
            };
            if asc { o } else { o.reverse() }
        });
    }
    egui::ScrollArea::both().show(ui, |ui| {
        egui::Grid::new("characteristics")
            .striped(true)
            .num_columns(HEADERS.len())
            .show(ui, |ui| {
                for (k, h) in HEADERS.iter().enumerate() {
                    let mark = match state.sort {
                        Some((c, true)) if c == k => " ▲",
                        Some((c, false)) if c == k => " ▼",
                        _ => "",
                    };
                    if ui.button(format!("{h}{mark}")).clicked() {
                        actions.push(Action::SortTable(k));
                    }
                }
                ui.end_row();
                for &i in &order {
                    for cell in cells(s, i) {
                        ui.label(cell);
                    }
                    ui.end_row();
                }
            });
        ui.add_space(10.0);
        capability_ui(ui, s);
    });
}

/// The limits of a characteristic in words: "27.9 to 28.1, target 28", "at most 12.018".
fn limits_text(e: &SpecEntry) -> String {
    let mut t = match (e.lower, e.upper) {
        (Some(l), Some(u)) => format!("{l} to {u}"),
        (Some(l), None) => format!("at least {l}"),
        (None, Some(u)) => format!("at most {u}"),
        (None, None) => String::new(),
    };
    if let Some(x) = e.target {
        t.push_str(&format!(", target {x}"));
    }
    t
}

fn interval_text(v: f64, i: [f64; 2]) -> String {
    format!(
        "{} [{}, {}]",
        format_sig(v, 4),
        format_sig(i[0], 4),
        format_sig(i[1], 4)
    )
}

/// Capability of each lot against the specification limits (Cp and Cpk, or CPU / CPL with one
/// limit), with intervals, expected ppm and the units observed outside the limits.
fn capability_ui(ui: &mut egui::Ui, s: &Shown) {
    let c = &s.comparison;
    let Some(d) = c.decision.as_ref().filter(|d| !d.capability.is_empty()) else {
        ui.weak("Capability (Cp, Cpk) appears here when the Specification tab gives limits.");
        return;
    };
    let colors = lot_colors(ui);
    ui.strong(format!(
        "Capability against the specification limits ({}% intervals; expected ppm outside under \
         a normal model)",
        format_confidence(c.alpha())
    ));
    egui::Grid::new("capability")
        .striped(true)
        .num_columns(8)
        .show(ui, |ui| {
            for h in [
                "characteristic",
                "limits",
                "lot",
                "index",
                "value [interval]",
                "Cp [interval]",
                "expected ppm",
                "units outside the limits",
            ] {
                ui.strong(h);
            }
            ui.end_row();
            for r in &d.capability {
                let entry = d
                    .specification
                    .characteristics
                    .iter()
                    .find(|e| e.characteristic == r.characteristic);
                for (g, l) in r.lots.iter().enumerate() {
                    if g == 0 {
                        ui.label(&r.characteristic);
                        ui.label(entry.map(limits_text).unwrap_or_default());
                    } else {
                        ui.label("");
                        ui.label("");
                    }
                    ui.horizontal(|ui| {
                        swatch(ui, colors[g], lot_filled(g));
                        ui.label(&c.lots[g].name);
                    });
                    lot_cells(ui, l);
                    ui.end_row();
                }
            }
        });
    if let Some(ins) = &d.in_spec {
        ui.add_space(4.0);
        for (g, l) in ins.lots.iter().enumerate() {
            ui.horizontal(|ui| {
                swatch(ui, colors[g], lot_filled(g));
                ui.label(format!(
                    "{}: inside every limit at once, expected {} ± {} (normal model){}",
                    c.lots[g].name,
                    format_sig(l.expected, 6),
                    format_sig(l.error, 2),
                    l.observed.map_or(String::new(), |o| format!(
                        "; observed: {} inside",
                        observed_words(o)
                    ))
                ));
            });
        }
    }
    ui.label(
        RichText::new(
            "Cp compares the tolerance width with six standard deviations; Cpk the distance from \
             the mean to the nearer limit with three. One limit only: CPU (upper) or CPL (lower).",
        )
        .small()
        .weak(),
    );
}

fn lot_cells(ui: &mut egui::Ui, l: &CapabilityLot) {
    ui.label(&l.index);
    ui.label(interval_text(l.cpk, l.cpk_interval));
    ui.label(match (l.cp, l.cp_interval) {
        (Some(v), Some(i)) => interval_text(v, i),
        _ => "-".into(),
    });
    ui.label(format_sig(l.ppm_expected, 4));
    ui.label(
        l.out_of_spec
            .map_or("-".to_string(), |n| format!("{n} of {}", l.n)),
    );
}
