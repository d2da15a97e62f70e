//! The per-characteristic table: both lots side by side, the difference and the univariate
//! tests; sortable, and copyable as tab-separated text for a spreadsheet.

use crate::analysis::{format_p, format_sig};

use super::app::Saved;
use super::shown::Shown;

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
    "difference",
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
        format_sig(r.lots[0].mean, 7),
        format_sig(r.lots[0].sd, 4),
        format_sig(r.lots[0].min, 7),
        format_sig(r.lots[0].max, 7),
        r.lots[1].n.to_string(),
        format_sig(r.lots[1].mean, 7),
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

/// Draws the table view.
pub fn table_ui(ui: &mut egui::Ui, s: &mut Shown, saved: &mut Saved) {
    ui.horizontal(|ui| {
        if ui
            .button("Copy table")
            .on_hover_text("Copy as tab-separated text, full precision, to paste into a spreadsheet")
            .clicked()
        {
            ui.ctx().copy_text(table_tsv(s));
        }
        ui.weak("Click a column title to sort. Difference = reference minus candidate; p-values are one characteristic at a time.");
    });
    let mut order: Vec<usize> = (0..s.comparison.per_characteristic.len()).collect();
    if let Some((col, asc)) = saved.table_sort {
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
                    let mark = match saved.table_sort {
                        Some((c, true)) if c == k => " ▲",
                        Some((c, false)) if c == k => " ▼",
                        _ => "",
                    };
                    if ui.button(format!("{h}{mark}")).clicked() {
                        saved.table_sort = match saved.table_sort {
                            Some((c, asc)) if c == k => Some((k, !asc)),
                            _ => Some((k, true)),
                        };
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
    });
}
