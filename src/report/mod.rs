//! Human-readable tables and machine-readable figures.

use crate::circuit::Summary;
use std::fmt::Write;

/// The table `tutti inspect` prints.
pub fn inspect_table(name: &str, s: &Summary) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{name}");
    let _ = writeln!(out, "  qubits          {}", s.qubits);
    let _ = writeln!(out, "  classical bits  {}", s.clbits);
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
