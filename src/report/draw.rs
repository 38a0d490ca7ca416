//! `tutti draw`: a timeline of a native sequence as an SVG picture.
//!
//! The design: one horizontal lane per ion, time running right with widths to
//! scale by the profile's durations (the timing model of the budget,
//! [`crate::native::budget::timeline`]) and an axis in microseconds. Whole-chain
//! pulses (collective rotations, MS pulses) are bars across every lane of an ion
//! that takes part; MS pulses carry their area in units of pi/2; single-ion
//! operations sit on their lane; a hidden ion's lane is hatched from its hiding to
//! its return; frame changes are thin dashed rules; checkpoints are numbered green
//! dashed rules across all lanes. A legend names each mark by the operation names of
//! the formats.
//!
//! A range (`from_us`, `to_us`) zooms in. When the range holds more operations than
//! can be drawn one by one ([`DrawOptions::max_marks`]), the picture aggregates:
//! each lane is cut into cells of two pixels, and each cell takes the colour of the
//! kind of operation that fills most of its time, with an opacity for how much of
//! the time is busy; the title says so.

use crate::native::budget::{timeline, Slot};
use crate::native::profile::Profile;
use crate::native::{names, NativeOp, Sequence};
use crate::report::xml_escape as escape;
use std::f64::consts::FRAC_PI_2;
use std::fmt::Write as _;

/// What to draw.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DrawOptions {
    /// Start of the range shown, in microseconds (default: 0).
    pub from_us: Option<f64>,
    /// End of the range shown (default: the end of the sequence).
    pub to_us: Option<f64>,
    /// Width of the picture in pixels (held to [`MIN_WIDTH`, `MAX_WIDTH`]).
    pub width: u32,
    /// Most operations drawn one by one; above it the range is aggregated.
    pub max_marks: usize,
}

impl Default for DrawOptions {
    fn default() -> DrawOptions {
        DrawOptions {
            from_us: None,
            to_us: None,
            width: 1200,
            max_marks: 3000,
        }
    }
}

/// The kinds of marks, with their colours and legend names.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Collective,
    Ms,
    PairMs,
    LightShift,
    Addressed,
    Measure,
    Reset,
}

impl Kind {
    const ALL: [Kind; 7] = [
        Kind::Collective,
        Kind::Ms,
        Kind::PairMs,
        Kind::LightShift,
        Kind::Addressed,
        Kind::Measure,
        Kind::Reset,
    ];

    fn colour(self) -> &'static str {
        match self {
            Kind::Collective => "#4C78A8",
            Kind::Ms => "#E45756",
            Kind::PairMs => "#F58518",
            Kind::LightShift => "#B279A2",
            Kind::Addressed => "#54A24B",
            Kind::Measure => "#1F1F1F",
            Kind::Reset => "#8C8C8C",
        }
    }

    fn name(self) -> &'static str {
        match self {
            Kind::Collective => names::CHAIN_ROTATE,
            Kind::Ms => names::CHAIN_MS,
            Kind::PairMs => names::PAIR_MS,
            Kind::LightShift => names::LIGHT_SHIFT,
            Kind::Addressed => names::ION_ROTATE,
            Kind::Measure => names::MEASURE,
            Kind::Reset => names::RESET,
        }
    }

    fn of(op: &NativeOp) -> Option<Kind> {
        Some(match op {
            NativeOp::Collective { .. } => Kind::Collective,
            NativeOp::Ms { .. } => Kind::Ms,
            NativeOp::PairMs { .. } => Kind::PairMs,
            NativeOp::LightShift { .. } => Kind::LightShift,
            NativeOp::Addressed { .. } => Kind::Addressed,
            NativeOp::Measure { .. } => Kind::Measure,
            NativeOp::Reset { .. } => Kind::Reset,
            NativeOp::VirtualZ { .. } | NativeOp::Hide { .. } | NativeOp::Unhide { .. } => {
                return None
            }
        })
    }
}

/// The narrowest and widest pictures drawn.
pub const MIN_WIDTH: u32 = 300;
pub const MAX_WIDTH: u32 = 20_000;

/// Most cells (lanes times columns) of an aggregated picture: bounds its memory
/// (seven sums per cell) for long chains.
const MAX_CELLS: usize = 2_000_000;

const LEFT: f64 = 64.0;
const RIGHT: f64 = 16.0;
const TOP: f64 = 74.0;
const AXIS: f64 = 40.0;

/// The lane height for `n` ions: 18 px, less for long chains (at least 6).
fn lane_height(n: u32) -> f64 {
    (720.0 / n.max(1) as f64).clamp(6.0, 18.0)
}

/// A round step for about `target` ticks over `span`.
fn tick_step(span: f64, target: f64) -> f64 {
    let raw = span / target;
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * p)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * p)
}

/// The ions each step acts on, given who is hidden, and the hidden spans of every
/// ion (start, end) in microseconds.
fn hidden_spans(seq: &Sequence, slots: &[Slot], end: f64) -> Vec<Vec<(f64, f64)>> {
    let n = seq.n_ions as usize;
    let mut spans = vec![Vec::new(); n];
    let mut since: Vec<Option<f64>> = vec![None; n];
    for (step, slot) in seq.steps.iter().zip(slots) {
        match step.op {
            NativeOp::Hide { ion } if (ion as usize) < n => {
                since[ion as usize].get_or_insert(slot.start_us + slot.duration_us);
            }
            NativeOp::Unhide { ion } if (ion as usize) < n => {
                if let Some(s) = since[ion as usize].take() {
                    spans[ion as usize].push((s, slot.start_us));
                }
            }
            _ => {}
        }
    }
    for (ion, s) in since.into_iter().enumerate() {
        if let Some(s) = s {
            spans[ion].push((s, end));
        }
    }
    spans
}

/// The SVG timeline of `seq` on `profile`. Errors: an empty or reversed range.
pub fn timeline_svg(
    seq: &Sequence,
    profile: &Profile,
    opts: &DrawOptions,
) -> Result<String, String> {
    let slots = timeline(seq, profile);
    let end = slots
        .iter()
        .map(|s| s.start_us + s.duration_us)
        .fold(0.0, f64::max);
    let t0 = opts.from_us.unwrap_or(0.0);
    let t1 = opts.to_us.unwrap_or(end.max(t0 + 1.0));
    if !(t0.is_finite() && t1.is_finite()) || t1 <= t0 || t0 < 0.0 {
        return Err(format!(
            "the range {t0} to {t1} us is empty; give --from below --to (the sequence lasts {end:.3} us)"
        ));
    }
    let n = seq.n_ions;
    let lane = lane_height(n);
    let width = opts.width.clamp(MIN_WIDTH, MAX_WIDTH) as f64;
    let plot_w = width - LEFT - RIGHT;
    let height = TOP + lane * n as f64 + AXIS;
    let x_of = |t: f64| LEFT + ((t - t0) / (t1 - t0)).clamp(0.0, 1.0) * plot_w;
    let y_of = |ion: u32| TOP + lane * ion as f64;
    let in_range = |s: &Slot| s.start_us + s.duration_us >= t0 && s.start_us <= t1;
    let shown = slots.iter().filter(|s| in_range(s)).count();
    let aggregate = shown > opts.max_marks;

    let mut out = String::new();
    let _ = writeln!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0}" height="{height:.0}" viewBox="0 0 {width:.0} {height:.0}" font-family="sans-serif" font-size="11">"#
    );
    out.push_str(
        r##"<defs><pattern id="hidden" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="#d9d9d9"/><line x1="0" y1="0" x2="0" y2="6" stroke="#9a9a9a" stroke-width="2"/></pattern></defs>
"##,
    );
    out.push_str("<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n");
    let title = format!(
        "{} ions, {} steps; {:.1} to {:.1} us of {:.1} us{}",
        n,
        seq.steps.len(),
        t0,
        t1,
        end,
        if aggregate {
            format!(
                "; {shown} operations in range, aggregated: each cell shows the operation that fills most of its time"
            )
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        out,
        r#"<text x="10" y="20" font-size="13" font-weight="bold">{}</text>"#,
        escape(&title)
    );
    // Legend.
    let mut lx = 10.0;
    for k in Kind::ALL {
        let _ = writeln!(
            out,
            r#"<rect x="{lx:.1}" y="32" width="12" height="12" fill="{}"/><text x="{:.1}" y="42">{}</text>"#,
            k.colour(),
            lx + 16.0,
            k.name()
        );
        lx += 22.0 + 7.0 * k.name().len() as f64;
    }
    let _ = writeln!(
        out,
        r#"<rect x="{lx:.1}" y="32" width="12" height="12" fill="url(#hidden)"/><text x="{:.1}" y="42">hidden</text>"#,
        lx + 16.0
    );
    lx += 70.0;
    let _ = writeln!(
        out,
        r##"<line x1="{lx:.1}" y1="31" x2="{lx:.1}" y2="45" stroke="#777" stroke-dasharray="2,2"/><text x="{:.1}" y="42">{}</text>"##,
        lx + 6.0,
        names::FRAME_Z
    );
    let _ = writeln!(
        out,
        r##"<text x="10" y="62" fill="#555">chain_ms bars carry their area in units of pi/2; widths follow the profile's durations</text>"##
    );
    // Lanes.
    for ion in 0..n {
        let y = y_of(ion);
        let fill = if ion % 2 == 0 { "#eef1f5" } else { "#ffffff" };
        let _ = writeln!(
            out,
            r#"<rect class="lane" x="0" y="{y:.1}" width="{width:.0}" height="{lane:.1}" fill="{fill}"/>"#
        );
        if lane >= 9.0 || ion % 5 == 0 {
            let _ = writeln!(
                out,
                r#"<text x="8" y="{:.1}" font-size="{:.0}">ion {ion}</text>"#,
                y + lane * 0.75,
                lane.min(11.0)
            );
        }
    }
    // Hidden spans under the marks.
    for (ion, spans) in hidden_spans(seq, &slots, end).iter().enumerate() {
        for &(a, b) in spans {
            if b < t0 || a > t1 {
                continue;
            }
            let (xa, xb) = (x_of(a), x_of(b));
            let _ = writeln!(
                out,
                r#"<rect x="{xa:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="url(#hidden)"><title>ion {ion} hidden from {a:.2} to {b:.2} us</title></rect>"#,
                y_of(ion as u32) + 1.0,
                (xb - xa).max(1.0),
                lane - 2.0
            );
        }
    }
    if aggregate {
        draw_aggregated(&mut out, seq, &slots, t0, t1, plot_w, lane, &x_of, &y_of)?;
    } else {
        draw_marks(&mut out, seq, &slots, t0, t1, lane, &x_of, &y_of);
    }
    // Checkpoints: a rule across every lane, numbered from 1.
    for (k, &pos) in seq.checkpoints.iter().enumerate() {
        let t = slots.get(pos).map_or(end, |s| s.start_us);
        if t < t0 || t > t1 {
            continue;
        }
        let x = x_of(t);
        let _ = writeln!(
            out,
            r##"<line class="checkpoint" x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{:.1}" stroke="#0B8A74" stroke-width="1.5" stroke-dasharray="6,3"/><text x="{:.1}" y="{:.1}" fill="#0B8A74">{}</text>"##,
            TOP - 12.0,
            TOP + lane * n as f64,
            x + 2.0,
            TOP - 3.0,
            k + 1
        );
    }
    // Time axis.
    let axis_y = TOP + lane * n as f64 + 4.0;
    let _ = writeln!(
        out,
        r##"<line x1="{LEFT:.1}" y1="{axis_y:.1}" x2="{:.1}" y2="{axis_y:.1}" stroke="#333"/>"##,
        LEFT + plot_w
    );
    let step = tick_step(t1 - t0, 8.0);
    let mut t = (t0 / step).ceil() * step;
    while t <= t1 + step * 1e-9 {
        let x = x_of(t);
        let _ = writeln!(
            out,
            r##"<line x1="{x:.1}" y1="{axis_y:.1}" x2="{x:.1}" y2="{:.1}" stroke="#333"/><text x="{x:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
            axis_y + 5.0,
            axis_y + 17.0,
            format_tick(t, step)
        );
        t += step;
    }
    let _ = writeln!(
        out,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="end">time (us)</text>"#,
        LEFT + plot_w,
        axis_y + 32.0
    );
    out.push_str("</svg>\n");
    Ok(out)
}

fn format_tick(t: f64, step: f64) -> String {
    if step >= 1.0 {
        format!("{t:.0}")
    } else {
        let places = (-step.log10()).ceil() as usize;
        format!("{t:.places$}")
    }
}

/// Every operation in range as its own mark.
#[allow(clippy::too_many_arguments)]
fn draw_marks(
    out: &mut String,
    seq: &Sequence,
    slots: &[Slot],
    t0: f64,
    t1: f64,
    lane: f64,
    x_of: &dyn Fn(f64) -> f64,
    y_of: &dyn Fn(u32) -> f64,
) {
    let n = seq.n_ions;
    let mut hidden = vec![false; n as usize];
    for (k, (step, slot)) in seq.steps.iter().zip(slots).enumerate() {
        let visible = slot.start_us + slot.duration_us >= t0 && slot.start_us <= t1;
        let op = &step.op;
        if visible {
            let (xa, xb) = (x_of(slot.start_us), x_of(slot.start_us + slot.duration_us));
            let w = (xb - xa).max(1.0);
            let tip = format!("step {}: {}", k + 1, describe(op));
            match (*op, Kind::of(op)) {
                (NativeOp::VirtualZ { .. }, _) => {
                    let _ = writeln!(
                        out,
                        r##"<line x1="{xa:.1}" y1="{:.1}" x2="{xa:.1}" y2="{:.1}" stroke="#777" stroke-dasharray="2,2"><title>{}</title></line>"##,
                        y_of(0),
                        y_of(n),
                        escape(&tip)
                    );
                }
                (NativeOp::Collective { .. } | NativeOp::Ms { .. }, Some(kind)) => {
                    // One bar over each run of lanes that take part.
                    let mut ion = 0;
                    while ion < n {
                        if hidden[ion as usize] {
                            ion += 1;
                            continue;
                        }
                        let first = ion;
                        while ion < n && !hidden[ion as usize] {
                            ion += 1;
                        }
                        let _ = writeln!(
                            out,
                            r#"<rect x="{xa:.2}" y="{:.1}" width="{w:.2}" height="{:.1}" fill="{}" fill-opacity="0.85"><title>{}</title></rect>"#,
                            y_of(first) + 1.0,
                            y_of(ion) - y_of(first) - 2.0,
                            kind.colour(),
                            escape(&tip)
                        );
                    }
                    if let NativeOp::Ms { theta, .. } = *op {
                        if w >= 26.0 {
                            let _ = writeln!(
                                out,
                                r#"<text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="10">{:.3}</text>"#,
                                xa + w / 2.0,
                                y_of(0) - 3.0,
                                theta.abs() / FRAC_PI_2
                            );
                        }
                    }
                }
                (NativeOp::PairMs { a, b, theta, .. }, Some(kind)) => {
                    for ion in [a, b] {
                        let _ = writeln!(
                            out,
                            r#"<rect x="{xa:.2}" y="{:.1}" width="{w:.2}" height="{:.1}" fill="{}"><title>{}</title></rect>"#,
                            y_of(ion) + 1.0,
                            lane - 2.0,
                            kind.colour(),
                            escape(&tip)
                        );
                    }
                    let (lo, hi) = (a.min(b), a.max(b));
                    let _ = writeln!(
                        out,
                        r#"<line x1="{:.1}" y1="{:.1}" x2="{:.1}" y2="{:.1}" stroke="{}" stroke-width="1.5"/>"#,
                        xa + w / 2.0,
                        y_of(lo) + lane / 2.0,
                        xa + w / 2.0,
                        y_of(hi) + lane / 2.0,
                        kind.colour()
                    );
                    if w >= 26.0 {
                        let _ = writeln!(
                            out,
                            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="9">{:.3}</text>"#,
                            xa + w / 2.0,
                            y_of(lo) - 1.0,
                            theta.abs() / FRAC_PI_2
                        );
                    }
                }
                (_, Some(kind)) => {
                    if let Some(ion) = single_ion(op) {
                        let _ = writeln!(
                            out,
                            r#"<rect x="{xa:.2}" y="{:.1}" width="{w:.2}" height="{:.1}" fill="{}"><title>{}</title></rect>"#,
                            y_of(ion) + 2.0,
                            lane - 4.0,
                            kind.colour(),
                            escape(&tip)
                        );
                    }
                }
                _ => {}
            }
        }
        match *op {
            NativeOp::Hide { ion } if ion < n => hidden[ion as usize] = true,
            NativeOp::Unhide { ion } if ion < n => hidden[ion as usize] = false,
            _ => {}
        }
    }
}

fn single_ion(op: &NativeOp) -> Option<u32> {
    match *op {
        NativeOp::LightShift { ion, .. }
        | NativeOp::Addressed { ion, .. }
        | NativeOp::Measure { ion, .. }
        | NativeOp::Reset { ion } => Some(ion),
        _ => None,
    }
}

/// A step for a tooltip: its name and angles.
fn describe(op: &NativeOp) -> String {
    match *op {
        NativeOp::Collective { theta, phi } => {
            format!("{} theta {theta:.4} phi {phi:.4}", op.name())
        }
        NativeOp::LightShift { ion, theta } => format!("{} ion {ion} theta {theta:.4}", op.name()),
        NativeOp::Ms { theta, phi } => format!(
            "{} theta {theta:.4} phi {phi:.4} (area {:.4} pi/2)",
            op.name(),
            theta.abs() / FRAC_PI_2
        ),
        NativeOp::PairMs { a, b, theta, phi } => {
            format!("{} ions {a},{b} theta {theta:.4} phi {phi:.4}", op.name())
        }
        NativeOp::Addressed { ion, theta, phi } => {
            format!("{} ion {ion} theta {theta:.4} phi {phi:.4}", op.name())
        }
        NativeOp::VirtualZ { theta } => format!("{} theta {theta:.4}", op.name()),
        NativeOp::Hide { ion } | NativeOp::Unhide { ion } | NativeOp::Reset { ion } => {
            format!("{} ion {ion}", op.name())
        }
        NativeOp::Measure { ion, clbit } => format!("{} ion {ion} -> bit {clbit}", op.name()),
    }
}

/// The range cut into cells of two pixels per lane, each coloured by the kind of
/// operation that fills most of its time.
#[allow(clippy::too_many_arguments)]
fn draw_aggregated(
    out: &mut String,
    seq: &Sequence,
    slots: &[Slot],
    t0: f64,
    t1: f64,
    plot_w: f64,
    lane: f64,
    x_of: &dyn Fn(f64) -> f64,
    y_of: &dyn Fn(u32) -> f64,
) -> Result<(), String> {
    let n = seq.n_ions as usize;
    let cells = ((plot_w / 2.0).floor().max(1.0) as usize)
        .min(MAX_CELLS / n.max(1))
        .max(1);
    let cell_us = (t1 - t0) / cells as f64;
    // Time per (ion, cell, kind).
    let kinds = Kind::ALL.len();
    let mut busy: Vec<f64> = Vec::new();
    busy.try_reserve_exact(n * cells * kinds)
        .map_err(|_| format!("not enough memory to aggregate {n} lanes of {cells} cells"))?;
    busy.resize(n * cells * kinds, 0.0);
    let mut hidden = vec![false; n];
    for (step, slot) in seq.steps.iter().zip(slots) {
        let op = &step.op;
        let (a, b) = (
            slot.start_us.max(t0),
            (slot.start_us + slot.duration_us).min(t1),
        );
        if let (Some(kind), true) = (Kind::of(op), b > a) {
            let k = Kind::ALL.iter().position(|x| *x == kind).unwrap_or(0);
            let first = ((a - t0) / cell_us).floor() as usize;
            let last = (((b - t0) / cell_us).ceil() as usize).min(cells);
            let mut add = |ion: usize| {
                for c in first..last.max(first + 1).min(cells) {
                    let (ca, cb) = (t0 + c as f64 * cell_us, t0 + (c + 1) as f64 * cell_us);
                    let overlap = (b.min(cb) - a.max(ca)).max(0.0);
                    busy[(ion * cells + c) * kinds + k] += overlap;
                }
            };
            match *op {
                NativeOp::Collective { .. } | NativeOp::Ms { .. } => {
                    (0..n).filter(|&i| !hidden[i]).for_each(&mut add)
                }
                NativeOp::PairMs { a, b, .. } => {
                    for i in [a, b] {
                        if (i as usize) < n {
                            add(i as usize);
                        }
                    }
                }
                _ => {
                    if let Some(i) = single_ion(op).filter(|&i| (i as usize) < n) {
                        add(i as usize);
                    }
                }
            }
        }
        match *op {
            NativeOp::Hide { ion } if (ion as usize) < n => hidden[ion as usize] = true,
            NativeOp::Unhide { ion } if (ion as usize) < n => hidden[ion as usize] = false,
            _ => {}
        }
    }
    for ion in 0..n {
        // Runs of cells with the same kind and opacity become one rectangle.
        let mut run: Option<(usize, usize, u8)> = None;
        let flush = |out: &mut String, run: Option<(usize, usize, u8)>, end: usize| {
            if let Some((start, k, level)) = run {
                let xa = x_of(t0 + start as f64 * cell_us);
                let xb = x_of(t0 + end as f64 * cell_us);
                let _ = writeln!(
                    out,
                    r#"<rect x="{xa:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{}" fill-opacity="{:.2}"/>"#,
                    y_of(ion as u32) + 1.0,
                    xb - xa,
                    lane - 2.0,
                    Kind::ALL[k].colour(),
                    level as f64 / 4.0
                );
            }
        };
        for c in 0..cells {
            let cell = &busy[(ion * cells + c) * kinds..(ion * cells + c + 1) * kinds];
            let total: f64 = cell.iter().sum();
            let here = if total > 0.0 {
                let k = (0..kinds)
                    .max_by(|&x, &y| cell[x].total_cmp(&cell[y]))
                    .unwrap_or(0);
                let level = ((total / cell_us * 4.0).ceil() as u8).clamp(1, 4);
                Some((k, level))
            } else {
                None
            };
            match (run, here) {
                (Some((_, k, l)), Some((k2, l2))) if k == k2 && l == l2 => {}
                (_, here) => {
                    flush(out, run, c);
                    run = here.map(|(k, l)| (c, k, l));
                }
            }
        }
        flush(out, run, cells);
    }
    Ok(())
}
