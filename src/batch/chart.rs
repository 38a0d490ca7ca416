//! `summary.svg`: one figure of every circuit across settings, at a glance.
//!
//! The design: one horizontal strip per circuit, in summary order. On each strip a
//! marker per setting sits at the setting's value divided by the first setting's,
//! on a logarithmic axis centred on 1 (a vertical rule), so "better" is left and
//! "worse" right whatever the figure's scale; the first setting's own value is
//! written at the strip's right end. Settings differ in colour (the Okabe-Ito
//! palette, readable with colour blindness) and in shape. A circuit a setting failed
//! on has no marker for it; one whose reference value is 0 is marked "no reference".

use super::summary::{Figure, Row};
use crate::report::xml_escape as escape;
use std::fmt::Write as _;

const PALETTE: [&str; 8] = [
    "#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#000000", "#F0E442",
];
const ROW_H: f64 = 18.0;
const TOP: f64 = 70.0;
const PLOT_W: f64 = 520.0;
const RIGHT_W: f64 = 120.0;

/// A marker of shape `k` centred at (x, y).
fn marker(out: &mut String, k: usize, x: f64, y: f64, title: &str) {
    let colour = PALETTE[k % PALETTE.len()];
    let r = 5.0;
    let shape = match (k / PALETTE.len() + k) % 4 {
        0 => format!(r#"<circle cx="{x:.1}" cy="{y:.1}" r="{r}" fill="{colour}""#),
        1 => format!(
            r#"<rect x="{:.1}" y="{:.1}" width="{}" height="{}" fill="{colour}""#,
            x - r,
            y - r,
            2.0 * r,
            2.0 * r
        ),
        2 => format!(
            r#"<polygon points="{:.1},{:.1} {:.1},{:.1} {:.1},{:.1} {:.1},{:.1}" fill="{colour}""#,
            x,
            y - r - 1.0,
            x + r + 1.0,
            y,
            x,
            y + r + 1.0,
            x - r - 1.0,
            y
        ),
        _ => format!(
            r#"<polygon points="{:.1},{:.1} {:.1},{:.1} {:.1},{:.1}" fill="{colour}""#,
            x,
            y - r - 1.0,
            x + r + 1.0,
            y + r,
            x - r - 1.0,
            y + r
        ),
    };
    let _ = writeln!(
        out,
        r#"{shape} fill-opacity="0.85" stroke="white" stroke-width="0.8"><title>{}</title></{}>"#,
        escape(title),
        shape
            .split_whitespace()
            .next()
            .unwrap_or("<circle")
            .trim_start_matches('<')
    );
}

/// The chart of `figure` for `rows` across `settings` (the first is the reference).
pub fn svg(settings: &[String], rows: &[Row], figure: Figure) -> String {
    let table = super::summary::grid(settings, rows);
    let paths: Vec<&str> = table.iter().map(|(p, _)| *p).collect();
    let value = |i: usize, k: usize| table[i].1[k].map(|f| figure.value(&f));
    // The axis: powers of two covering every ratio, at least 1/2 .. 2.
    let mut span: f64 = 1.0;
    for i in 0..paths.len() {
        let Some(base) = value(i, 0).filter(|b| *b > 0.0) else {
            continue;
        };
        for k in 1..settings.len() {
            if let Some(v) = value(i, k).filter(|v| *v > 0.0) {
                span = span.max((v / base).log2().abs().ceil());
            }
        }
    }
    let span = span.min(12.0);
    let label_w = (paths.iter().map(|p| p.chars().count()).max().unwrap_or(4) as f64 * 6.6 + 16.0)
        .clamp(80.0, 360.0);
    let width = label_w + PLOT_W + RIGHT_W;
    let legend_rows = settings.len().div_ceil(3) as f64;
    let top = TOP + legend_rows * 16.0;
    let height = top + paths.len().max(1) as f64 * ROW_H + 40.0;
    let x_of = |ratio: f64| {
        let t = (ratio.log2().clamp(-span, span) + span) / (2.0 * span);
        label_w + 10.0 + t * (PLOT_W - 20.0)
    };
    let mut out = String::new();
    let _ = writeln!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0}" height="{height:.0}" viewBox="0 0 {width:.0} {height:.0}" font-family="sans-serif" font-size="11">"#
    );
    let _ = writeln!(out, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        out,
        r#"<text x="12" y="22" font-size="15" font-weight="bold">{} of each circuit, relative to {}</text>"#,
        figure.name(),
        escape(&settings[0])
    );
    let _ = writeln!(
        out,
        r##"<text x="12" y="40" fill="#444">left of the rule: smaller than the reference; logarithmic axis; no marker: the job failed</text>"##
    );
    for (k, s) in settings.iter().enumerate() {
        let (col, line) = (k % 3, k / 3);
        let x = 18.0 + col as f64 * (width - 24.0) / 3.0;
        let y = 58.0 + line as f64 * 16.0;
        marker(&mut out, k, x, y - 4.0, s);
        let _ = writeln!(
            out,
            r#"<text x="{:.1}" y="{y:.1}">{}</text>"#,
            x + 10.0,
            escape(s)
        );
    }
    // Axis: strips, grid at powers of two, the rule at 1.
    let plot_top = top;
    let plot_bottom = top + paths.len().max(1) as f64 * ROW_H;
    for (i, _) in paths.iter().enumerate() {
        if i % 2 == 0 {
            let _ = writeln!(
                out,
                r##"<rect x="0" y="{:.1}" width="{width:.0}" height="{ROW_H}" fill="#f3f5f8"/>"##,
                plot_top + i as f64 * ROW_H
            );
        }
    }
    let mut e = -span as i32;
    while e <= span as i32 {
        let x = x_of(2f64.powi(e));
        let (stroke, w) = if e == 0 {
            ("#222", 1.5)
        } else {
            ("#c8ccd2", 0.8)
        };
        let _ = writeln!(
            out,
            r#"<line x1="{x:.1}" y1="{plot_top:.1}" x2="{x:.1}" y2="{plot_bottom:.1}" stroke="{stroke}" stroke-width="{w}"/>"#
        );
        let label = if e >= 0 {
            format!("{}x", 1u64 << e)
        } else {
            format!("1/{}", 1u64 << (-e))
        };
        let _ = writeln!(
            out,
            r##"<text x="{x:.1}" y="{:.1}" text-anchor="middle" fill="#444">{label}</text>"##,
            plot_bottom + 14.0
        );
        e += 1;
    }
    let _ = writeln!(
        out,
        r##"<text x="{:.1}" y="{:.1}" text-anchor="end" fill="#444">{} of {}</text>"##,
        width - 8.0,
        top - 4.0,
        figure.name(),
        escape(&settings[0])
    );
    for (i, p) in paths.iter().enumerate() {
        let y = plot_top + (i as f64 + 0.5) * ROW_H;
        let _ = writeln!(
            out,
            r#"<text x="8" y="{:.1}">{}</text>"#,
            y + 4.0,
            escape(p)
        );
        let base = value(i, 0);
        let right = match base {
            Some(b) => figure.format(b),
            None => "failed".into(),
        };
        let _ = writeln!(
            out,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{right}</text>"#,
            width - 8.0,
            y + 4.0
        );
        match base {
            Some(b) if b > 0.0 => {
                for (k, s) in settings.iter().enumerate() {
                    let Some(v) = value(i, k) else { continue };
                    let ratio = if v > 0.0 { v / b } else { 2f64.powf(-span) };
                    let title = format!(
                        "{p}, {s}: {} ({:.3} of the reference)",
                        figure.format(v),
                        v / b
                    );
                    marker(&mut out, k, x_of(ratio), y, &title);
                }
            }
            Some(_) => {
                let _ = writeln!(
                    out,
                    r##"<text x="{:.1}" y="{:.1}" fill="#777">no reference (0)</text>"##,
                    label_w + 14.0,
                    y + 4.0
                );
            }
            None => {}
        }
    }
    out.push_str("</svg>\n");
    out
}
