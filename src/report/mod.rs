//! Human-readable tables and machine-readable figures.

/// The budget model lives with the native operations it costs (the optimizer
/// costs its candidates with it); re-exported here for the report tables.
pub use crate::native::budget;

pub mod draw;

use crate::circuit::Summary;
use crate::sim::Verdict;
use std::fmt::Write;

/// Text made safe for SVG/XML content and attribute values.
pub fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The table `tutti inspect` prints.
pub fn inspect_table(name: &str, s: &Summary) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{name}");
    let _ = writeln!(out, "  qubits          {}", s.qubits);
    let _ = writeln!(out, "  classical bits  {}", s.bits);
    let _ = writeln!(out, "  operations      {}", s.ops);
    let _ = writeln!(out, "  two-qubit gates {}", s.two_qubit_ops);
    let _ = writeln!(out, "  wider gates     {}", s.multi_qubit_ops);
    let _ = writeln!(out, "  measurements    {}", s.measurements);
    let _ = writeln!(out, "  conditioned     {}", s.conditioned);
    let _ = writeln!(out, "  barriers        {}", s.barriers);
    let _ = writeln!(out, "  depth           {}", s.depth);
    let _ = writeln!(out, "  by gate:");
    let width = s.by_name.keys().map(|k| k.len()).max().unwrap_or(0);
    for (name, count) in &s.by_name {
        let _ = writeln!(out, "    {name:<width$}  {count}");
    }
    out
}

/// The table `tutti inspect` prints for a pulse sequence.
pub fn sequence_table(name: &str, s: &crate::native::SequenceSummary) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{name} (a pulse sequence)");
    let _ = writeln!(out, "  ions             {}", s.ions);
    let _ = writeln!(out, "  addressed ions   {}", s.addressed_ions);
    let _ = writeln!(out, "  classical bits   {}", s.bits);
    let _ = writeln!(out, "  steps            {}", s.steps);
    let _ = writeln!(out, "  entangling       {}", s.entangling_pulses);
    let _ = writeln!(out, "  conditioned      {}", s.conditioned);
    let _ = writeln!(out, "  by operation:");
    let width = s.by_op.keys().map(|k| k.len()).max().unwrap_or(0);
    for (name, count) in &s.by_op {
        let _ = writeln!(out, "    {name:<width$}  {count}");
    }
    out
}

/// `x` with `places` decimals, after rounding away the last bits of f64 noise, so
/// that one value computed by two different sums prints the same (9.0625 was 9.063
/// on one target and 9.062 on the other).
pub fn fixed(x: f64, places: usize) -> String {
    let cleaned = (x * 1e9).round() / 1e9;
    format!("{cleaned:.places$}")
}

/// The report of a sequence proven equal to its circuit window by window along its
/// compile trace, after the whole comparison was refused for `refusal`.
pub fn window_verdict_text(v: &crate::sim::WindowVerdict, refusal: &str) -> String {
    format!(
        "EQUIVALENT window by window along the compile trace ({} windows, mode {}, worst distance {}, tolerance {:.1e})\n  note          the whole comparison was refused ({refusal}); equal windows prove the whole equal\n",
        v.windows,
        v.mode.name(),
        v.distance.map_or("none".to_string(), |d| format!("{d:.1e}")),
        v.tolerance
    )
}

/// The text `tutti check` prints.
pub fn verdict_text(v: &Verdict) -> String {
    let mut out = String::new();
    let word = if v.equivalent {
        "EQUIVALENT"
    } else {
        "NOT EQUIVALENT"
    };
    let _ = writeln!(
        out,
        "{word} (mode {}, {} segment(s))",
        v.mode.name(),
        v.segments
    );
    let _ = writeln!(
        out,
        "  qubits        {} and {} (compared in a space of {}; at most {} in one comparison after idle ones were split off)",
        v.qubits_a, v.qubits_b, v.qubits, v.compared_qubits
    );
    if let Some(note) = &v.padding {
        let _ = writeln!(out, "  note          {note}");
    }
    if v.final_diagonal {
        let _ = writeln!(
            out,
            "  note          the unitary before the final measurements was compared up to a diagonal on the measured qubits (same outcome statistics, not the same unitary)"
        );
    }
    let _ = writeln!(
        out,
        "  distance      {}  (tolerance {:.3e}; docs/checker.md)",
        v.distance
            .map_or_else(|| "not measured".into(), |d| format!("{d:.3e}")),
        v.tolerance
    );
    let _ = writeln!(out, "  fidelity      {:.12}", v.fidelity);
    match v.global_phase {
        Some(g) => {
            let _ = writeln!(out, "  global phase  {g:.9} rad");
        }
        None => {
            let _ = writeln!(out, "  global phase  not measured in this mode");
        }
    }
    if !v.detail.is_empty() {
        let _ = writeln!(out, "  {}", v.detail);
    }
    out
}

/// The table `tutti budget` and `tutti compile` print.
pub fn budget_table(b: &budget::Budget) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "  ms_pulses          {}", b.ms_pulses);
    let _ = writeln!(
        out,
        "  ms_area            {}  (units of pi/2)",
        fixed(b.ms_area, 3)
    );
    let _ = writeln!(out, "  entangling_depth   {}", b.entangling_depth);
    let _ = writeln!(out, "  collective_pulses  {}", b.collective_pulses);
    let _ = writeln!(out, "  light_shifts       {}", b.light_shifts);
    let _ = writeln!(out, "  ion_rotations      {}", b.addressed_rotations);
    let _ = writeln!(out, "  hide_operations    {}", b.hide_operations);
    let _ = writeln!(out, "  measurements       {}", b.measurements);
    let _ = writeln!(out, "  duration_us        {:.1}", b.duration_us);
    let _ = writeln!(
        out,
        "  est_error          {:.4}  (model: docs/budget.md)",
        b.est_error
    );
    if let Some(x) = b.crosstalk_error {
        let _ = writeln!(
            out,
            "  crosstalk_error    {x:.2e}  (stray light shifts on other ions; not in est_error)"
        );
    }
    if !b.idle_us.is_empty() {
        let max = b.idle_us.iter().cloned().fold(0.0, f64::max);
        let min = b.idle_us.iter().cloned().fold(f64::INFINITY, f64::min);
        let _ = writeln!(
            out,
            "  idle_us per ion    min {min:.1}, max {max:.1} over {} ions",
            b.idle_us.len()
        );
    }
    out
}

/// One line on the optimizer's coupling blocks: how many, their MS area, and the
/// ratio of the area of the blocks with a certified lower bound to the sum of those
/// bounds (docs/budget.md: quality per block against the optimum where it is
/// computable; a block made without the coupling program has none). `None` for the
/// baseline.
pub fn blocks_line(blocks: &[crate::compile::optimize::BlockReport]) -> Option<String> {
    if blocks.is_empty() {
        return None;
    }
    let area: f64 = blocks.iter().map(|b| b.area).sum();
    let bounded: Vec<_> = blocks.iter().filter(|b| b.lower_bound > 0.0).collect();
    let bound: f64 = bounded.iter().map(|b| b.lower_bound).sum();
    let ratio = if bound > 0.0 {
        let bounded_area: f64 = bounded.iter().map(|b| b.area).sum();
        format!("{:.3}", bounded_area / bound)
    } else {
        "-".into()
    };
    let of = if bounded.len() < blocks.len() {
        format!(
            " ({} of them; the others were made without the coupling program)",
            bounded.len()
        )
    } else {
        String::new()
    };
    Some(format!(
        "coupling blocks: {}, MS area {} (units of pi/2), {ratio} times the sum of their certified lower bounds{of}",
        blocks.len(),
        fixed(area, 3)
    ))
}
