//! The pair view: any two characteristics with both lots' units, each lot's mean confidence
//! ellipse and data ellipse, the mean-difference ellipse, and a grid of the pairs among the
//! characteristics that drive the shift most.

use egui::{Color32, RichText};
use egui_plot::{HLine, Legend, Line, LineStyle, MarkerShape, Plot, PlotPoints, Points, VLine};

use crate::analysis::{format_confidence, format_sig};

use super::action::Action;
use super::shown::{SMALL_POINTS, Shown};
use super::state::Saved;
use super::theme::{lot_colors, lot_filled};

/// The pair view's own state (kept between sessions in [`Saved`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PairsState {
    /// Pair shown (characteristic names, across and up).
    pub pair: Option<[String; 2]>,
    /// Show the grid of leading pairs.
    pub grid: bool,
    /// Draw the mean-difference region as the shadow of the full T² region (else the pair
    /// alone).
    pub difference_shadow: bool,
}

impl PairsState {
    /// The state kept from the last session.
    pub fn from_saved(saved: &Saved) -> Self {
        PairsState {
            pair: saved.pair.clone(),
            grid: saved.pair_grid,
            difference_shadow: saved.difference_shadow,
        }
    }

    /// Keeps the state for the next session.
    pub fn save_to(&self, saved: &mut Saved) {
        saved.pair = self.pair.clone();
        saved.pair_grid = self.grid;
        saved.difference_shadow = self.difference_shadow;
    }
}

/// Colour of the specification limits.
const LIMITS: Color32 = Color32::from_rgb(40, 140, 85);

/// The specification limits of characteristic `k` (lower, upper), when any is given.
fn limits(s: &Shown, k: usize) -> (Option<f64>, Option<f64>) {
    let name = &s.comparison.characteristics[k];
    s.comparison
        .decision
        .as_ref()
        .and_then(|d| {
            d.specification
                .characteristics
                .iter()
                .find(|e| &e.characteristic == name)
        })
        .map_or((None, None), |e| (e.lower, e.upper))
}

/// Characteristics in the small-multiples grid (those driving the shift most).
pub const GRID_CHARACTERISTICS: usize = 6;

fn index_of(names: &[String], n: &str) -> Option<usize> {
    names.iter().position(|x| x == n)
}

/// The pair to show: the saved one if it still exists, else the two leading drivers.
pub fn current_pair(s: &Shown, state: &PairsState) -> Option<(usize, usize)> {
    let names = &s.comparison.characteristics;
    if names.len() < 2 {
        return None;
    }
    if let Some([a, b]) = &state.pair
        && let (Some(i), Some(j)) = (index_of(names, a), index_of(names, b))
        && i != j
    {
        return Some((i, j));
    }
    let r = &s.comparison.ranking;
    let i = index_of(names, &r[0].characteristic)?;
    let j = index_of(names, &r[1].characteristic)?;
    Some((i, j))
}

fn label(s: &Shown, k: usize) -> String {
    match s.comparison.units.get(k).cloned().flatten() {
        Some(u) => format!("{} ({u})", s.comparison.characteristics[k]),
        None => s.comparison.characteristics[k].clone(),
    }
}

/// What the view says instead of the units of a comparison made inside a database.
pub const NOT_COMPUTED_PAIRS: &str = "Pairs of characteristics unit by unit: not computed inside \
     the database (no unit left it). The Verdict, Characteristics, Intervals and Shift \
     direction views show what was computed there.";

/// Draws the pair view, with the data ellipses at `coverage`; choosing a pair or an option
/// asks for it.
pub fn pairs_ui(
    ui: &mut egui::Ui,
    s: &mut Shown,
    state: &PairsState,
    coverage: f64,
    actions: &mut Vec<Action>,
) {
    if s.in_database() {
        ui.label(NOT_COMPUTED_PAIRS);
        return;
    }
    let colors = lot_colors(ui);
    let Some((mut i, mut j)) = current_pair(s, state) else {
        ui.label("Pairs need at least two characteristics.");
        return;
    };
    let names = s.comparison.characteristics.clone();
    let mut grid = state.grid;
    ui.horizontal(|ui| {
        ui.label("across");
        egui::ComboBox::from_id_salt("pair-x")
            .selected_text(names[i].clone())
            .show_ui(ui, |ui| {
                for (k, n) in names.iter().enumerate() {
                    ui.selectable_value(&mut i, k, n);
                }
            });
        ui.label("up");
        egui::ComboBox::from_id_salt("pair-y")
            .selected_text(names[j].clone())
            .show_ui(ui, |ui| {
                for (k, n) in names.iter().enumerate() {
                    ui.selectable_value(&mut j, k, n);
                }
            });
        if ui.checkbox(&mut grid, "grid of leading pairs").changed() {
            actions.push(Action::ShowPairGrid(grid));
        }
    });
    if i != j {
        let pair = [names[i].clone(), names[j].clone()];
        if state.pair.as_ref() != Some(&pair) {
            actions.push(Action::SelectPair(pair));
        }
    }
    let view = s.pair(i, j, coverage);
    let conf = format_confidence(s.comparison.alpha());
    let (xl, xu) = limits(s, i);
    let (yl, yu) = limits(s, j);
    let any_limit = [xl, xu, yl, yu].iter().any(Option::is_some);
    ui.label(
        RichText::new(format!(
            "Solid: each lot's {conf}% confidence ellipse for its mean (this pair alone). Dashed: \
             data ellipses expected to hold {}% of a normal lot's units.{}",
            format_sig(100.0 * coverage, 3),
            if any_limit {
                " Green: the specification limits."
            } else {
                ""
            }
        ))
        .small(),
    );
    let avail = ui.available_size();
    let grid_w = if grid {
        (avail.x * 0.36).min(420.0)
    } else {
        0.0
    };
    let main_w = (avail.x - grid_w - 12.0).max(200.0);
    let mut clicked_pair = None;
    ui.horizontal_top(|ui| {
        ui.vertical(|ui| {
            ui.set_width(main_w);
            let lots = [
                (
                    0,
                    colors[0],
                    format!("reference: {}", s.comparison.lots[0].name),
                ),
                (
                    1,
                    colors[1],
                    format!("candidate: {}", s.comparison.lots[1].name),
                ),
            ];
            let hover_names = [lots[0].2.clone(), lots[1].2.clone()];
            let hover_text = s.unit_text.clone();
            let sampled = s.sample[0].len() < s.prepared.lots[0].kept.len()
                || s.sample[1].len() < s.prepared.lots[1].kept.len();
            Plot::new(("pair", i, j))
                .height((avail.y * 0.62).max(260.0))
                .legend(Legend::default())
                .x_axis_label(label(s, i))
                .y_axis_label(label(s, j))
                .label_formatter(move |h| match h {
                    egui_plot::HoverPosition::NearDataPoint {
                        plot_name, index, ..
                    } => {
                        let g = hover_names.iter().position(|n| n == plot_name)?;
                        hover_text[g].get(*index).cloned()
                    }
                    egui_plot::HoverPosition::Elsewhere { .. } => None,
                })
                .show(ui, |plot| {
                    // Both limits of both: the rectangle; otherwise each limit given as a line.
                    if let (Some(a), Some(b), Some(c), Some(d)) = (xl, xu, yl, yu) {
                        plot.line(
                            Line::new(
                                "specification limits",
                                vec![[a, c], [b, c], [b, d], [a, d], [a, c]],
                            )
                            .color(LIMITS)
                            .width(1.5)
                            .allow_hover(false),
                        );
                    } else {
                        for x in [xl, xu].into_iter().flatten() {
                            plot.vline(
                                VLine::new("specification limits", x)
                                    .color(LIMITS)
                                    .width(1.5),
                            );
                        }
                        for y in [yl, yu].into_iter().flatten() {
                            plot.hline(
                                HLine::new("specification limits", y)
                                    .color(LIMITS)
                                    .width(1.5),
                            );
                        }
                    }
                    for (g, color, name) in &lots {
                        plot.points(
                            Points::new(name.clone(), PlotPoints::Borrowed(&view.points[*g]))
                                .color(color.gamma_multiply(0.8))
                                .filled(lot_filled(*g))
                                .radius(2.8),
                        );
                        // Same name as the units: one legend entry per lot.
                        if let Some(e) = &view.geometry.mean_regions[*g] {
                            plot.line(
                                Line::new(name.clone(), e.clone())
                                    .color(*color)
                                    .width(2.0)
                                    .allow_hover(false),
                            );
                        }
                        if let Some(e) = &view.geometry.data_ellipses[*g] {
                            plot.line(
                                Line::new(name.clone(), e.clone())
                                    .color(*color)
                                    .style(LineStyle::dashed_loose())
                                    .allow_hover(false),
                            );
                        }
                        plot.points(
                            Points::new(name.clone(), vec![view.geometry.means[*g]])
                                .shape(MarkerShape::Diamond)
                                .filled(lot_filled(*g))
                                .radius(7.0)
                                .color(*color)
                                .allow_hover(false),
                        );
                    }
                });
            if sampled {
                ui.weak(format!(
                    "Drawing a fixed subsample of {} + {} units; every statistic uses all units.",
                    s.sample[0].len(),
                    s.sample[1].len()
                ));
            }
            ui.add_space(4.0);
            difference_ui(ui, s, state, actions, &view.geometry, i, j);
        });
        if grid {
            ui.vertical(|ui| {
                ui.set_width(grid_w);
                clicked_pair = grid_ui(ui, s, coverage, grid_w);
            });
        }
    });
    if let Some((a, b)) = clicked_pair {
        actions.push(Action::SelectPair([names[a].clone(), names[b].clone()]));
    }
}

fn difference_ui(
    ui: &mut egui::Ui,
    s: &Shown,
    state: &PairsState,
    actions: &mut Vec<Action>,
    g: &crate::analysis::PairGeometry,
    i: usize,
    j: usize,
) {
    let mut shadow = state.difference_shadow;
    ui.horizontal(|ui| {
        ui.label("Mean difference region (Δ = candidate − reference):");
        ui.radio_value(&mut shadow, true, "consistent with all characteristics")
            .on_hover_text("The shadow of the full T² confidence region on this pair: agrees with the simultaneous intervals");
        ui.radio_value(&mut shadow, false, "this pair alone")
            .on_hover_text("A confidence region for these two mean differences only (2-characteristic critical value)");
    });
    if shadow != state.difference_shadow {
        actions.push(Action::DifferenceShadow(shadow));
    }
    let outline = if shadow {
        &g.difference_shadow
    } else {
        &g.difference_pair
    };
    let covers_zero = outline
        .as_ref()
        .map(|o| contains_origin(o))
        .unwrap_or(false);
    Plot::new(("difference", i, j))
        .height((ui.available_height() - 24.0).max(160.0))
        .x_axis_label(format!("Δ {}", label(s, i)))
        .y_axis_label(format!("Δ {}", label(s, j)))
        .show(ui, |plot| {
            if let Some(o) = outline {
                plot.line(
                    Line::new("mean difference region", o.clone())
                        .color(Color32::from_rgb(120, 70, 160))
                        .width(2.0),
                );
            }
            plot.points(
                Points::new("no difference", vec![[0.0, 0.0]])
                    .shape(MarkerShape::Plus)
                    .radius(8.0)
                    .color(Color32::GRAY),
            );
            plot.points(
                Points::new("observed difference", vec![g.difference])
                    .radius(5.0)
                    .color(Color32::from_rgb(120, 70, 160)),
            );
        });
    ui.weak(if covers_zero {
        "The region contains (0, 0): no difference on this pair at this confidence."
    } else {
        "The region excludes (0, 0): this pair's means differ."
    });
}

/// Whether a closed outline (convex) contains the origin.
fn contains_origin(o: &[[f64; 2]]) -> bool {
    let mut sign = 0.0_f64;
    for w in o.windows(2) {
        let cross = w[0][0] * w[1][1] - w[0][1] * w[1][0];
        if cross.abs() < 1e-300 {
            continue;
        }
        if sign == 0.0 {
            sign = cross.signum();
        } else if cross.signum() != sign {
            return false;
        }
    }
    true
}

fn grid_ui(ui: &mut egui::Ui, s: &mut Shown, coverage: f64, width: f32) -> Option<(usize, usize)> {
    let colors = lot_colors(ui);
    let names = s.comparison.characteristics.clone();
    let lead: Vec<usize> = s
        .comparison
        .ranking
        .iter()
        .take(GRID_CHARACTERISTICS)
        .filter_map(|r| index_of(&names, &r.characteristic))
        .collect();
    let k = lead.len();
    if k < 2 {
        return None;
    }
    ui.label(
        RichText::new(format!(
            "Pairs of the {k} leading characteristics (click to open)"
        ))
        .small(),
    );
    let cell = ((width - 8.0) / (k - 1) as f32 - 4.0).max(40.0);
    let mut clicked = None;
    for row in 1..k {
        ui.horizontal(|ui| {
            ui.spacing_mut().item_spacing = egui::vec2(4.0, 4.0);
            for col in 0..row {
                let (a, b) = (lead[col], lead[row]);
                let view = s.pair(a, b, coverage);
                let resp = Plot::new(("cell", a, b))
                    .width(cell)
                    .height(cell)
                    .show_axes(false)
                    .show_grid(false)
                    .allow_drag(false)
                    .allow_zoom(false)
                    .allow_scroll(false)
                    .allow_boxed_zoom(false)
                    .show_x(false)
                    .show_y(false)
                    .show(ui, |plot| {
                        for (g, color) in [(0, colors[0]), (1, colors[1])] {
                            let pts = &view.points[g][..view.points[g].len().min(SMALL_POINTS)];
                            plot.points(
                                Points::new(format!("lot {g}"), PlotPoints::Borrowed(pts))
                                    .color(color.gamma_multiply(0.6))
                                    .filled(lot_filled(g))
                                    .radius(1.2)
                                    .allow_hover(false),
                            );
                            if let Some(e) = &view.geometry.mean_regions[g] {
                                plot.line(
                                    Line::new(format!("mean {g}"), e.clone())
                                        .color(color)
                                        .width(1.5)
                                        .allow_hover(false),
                                );
                            }
                        }
                    })
                    .response
                    .on_hover_text(format!("{} across, {} up", names[a], names[b]));
                if resp.clicked() {
                    clicked = Some((a, b));
                }
            }
        });
    }
    clicked
}
