//! The flat circuit IR: registers, and a list of instructions on global qubit and
//! classical-bit indices.
//!
//! Invariant: every qubit and clbit index is below `n_qubits()` / `n_clbits()`; the
//! qubits of one instruction are distinct; a gate has as many qubits and parameters
//! as its kind says. The `Display` form is OpenQASM 2 that `qasm::read_str` reads
//! back to an equal circuit.

pub mod defer;
pub mod gates;
pub mod mat2;

pub use gates::{Gate, GateKind, Mat2};

use smallvec::SmallVec;
use std::collections::BTreeMap;

/// The qubits of one operation; up to four are stored without allocation.
pub type Qubits = SmallVec<[Qubit; 4]>;
use std::fmt;

/// A qubit of the circuit, numbered across all quantum registers in declaration order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Qubit(pub u32);

/// A classical bit, numbered across all classical registers in declaration order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Clbit(pub u32);

/// A named register occupying `size` consecutive global indices from `offset`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Register {
    pub name: String,
    pub offset: u32,
    pub size: u32,
}

/// An `opaque` declaration: its gates can be read and inspected but not compiled.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OpaqueDecl {
    pub name: String,
    pub n_params: usize,
    pub n_qubits: usize,
}

/// One operation of the flat IR.
#[derive(Debug, Clone, PartialEq)]
pub enum Op {
    Gate {
        gate: Gate,
        qubits: Qubits,
    },
    Opaque {
        decl: u32,
        params: Vec<f64>,
        qubits: Qubits,
    },
    Measure {
        qubit: Qubit,
        clbit: Clbit,
    },
    Reset {
        qubit: Qubit,
    },
    Barrier {
        qubits: Qubits,
    },
}

/// `if(creg == value)`: the condition of a classically controlled instruction.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Condition {
    /// Index into `Circuit::cregs`.
    pub creg: u32,
    pub value: RegValue,
}

/// The value of a classical register, as wide as the register (OpenQASM 2 compares a
/// whole register with a non-negative integer; registers may be far wider than 64
/// bits). Canonical: `Wide` only for values above `u64::MAX`, so equality of values
/// is equality of the representations.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum RegValue {
    Small(u64),
    Wide(std::sync::Arc<num_bigint::BigUint>),
}

impl RegValue {
    /// Reads a decimal number of any length (ASCII digits only).
    pub fn parse_decimal(digits: &str) -> Option<RegValue> {
        if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        if let Ok(v) = digits.parse::<u64>() {
            return Some(RegValue::Small(v));
        }
        num_bigint::BigUint::parse_bytes(digits.as_bytes(), 10).map(RegValue::from)
    }

    /// The number of bits needed to write the value (0 for zero).
    pub fn bits(&self) -> u64 {
        match self {
            RegValue::Small(v) => 64 - u64::from(v.leading_zeros()),
            RegValue::Wide(b) => b.bits(),
        }
    }

    /// Whether a register of `size` bits can hold the value.
    pub fn fits(&self, size: u32) -> bool {
        self.bits() <= u64::from(size)
    }
}

impl From<u64> for RegValue {
    fn from(v: u64) -> RegValue {
        RegValue::Small(v)
    }
}

impl From<num_bigint::BigUint> for RegValue {
    fn from(b: num_bigint::BigUint) -> RegValue {
        match u64::try_from(&b) {
            Ok(v) => RegValue::Small(v),
            Err(_) => RegValue::Wide(std::sync::Arc::new(b)),
        }
    }
}

impl fmt::Display for RegValue {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RegValue::Small(v) => write!(f, "{v}"),
            RegValue::Wide(b) => write!(f, "{b}"),
        }
    }
}

/// JSON: a number when it fits 64 bits, else a decimal string.
impl serde::Serialize for RegValue {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self {
            RegValue::Small(v) => s.serialize_u64(*v),
            RegValue::Wide(b) => s.serialize_str(&b.to_string()),
        }
    }
}

impl<'de> serde::Deserialize<'de> for RegValue {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<RegValue, D::Error> {
        #[derive(serde::Deserialize)]
        #[serde(untagged)]
        enum Either {
            Number(u64),
            Text(String),
        }
        match Either::deserialize(d)? {
            Either::Number(v) => Ok(RegValue::Small(v)),
            Either::Text(t) => RegValue::parse_decimal(&t).ok_or_else(|| {
                serde::de::Error::custom(format!("`{t}` is not a non-negative whole number"))
            }),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Instr {
    pub op: Op,
    pub condition: Option<Condition>,
}

impl Op {
    /// The qubits this operation touches.
    pub fn qubits(&self) -> &[Qubit] {
        match self {
            Op::Gate { qubits, .. } | Op::Opaque { qubits, .. } | Op::Barrier { qubits } => qubits,
            Op::Measure { qubit, .. } | Op::Reset { qubit } => std::slice::from_ref(qubit),
        }
    }
}

/// A whole program after elaboration.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Circuit {
    pub qregs: Vec<Register>,
    pub cregs: Vec<Register>,
    pub opaque: Vec<OpaqueDecl>,
    pub instrs: Vec<Instr>,
}

/// Counts that `tutti inspect` reports.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Summary {
    pub qubits: u32,
    /// Classical bits, in all registers together.
    pub bits: u32,
    /// Operations after expansion, barriers excluded.
    pub ops: usize,
    pub two_qubit_ops: usize,
    pub multi_qubit_ops: usize,
    pub measurements: usize,
    pub barriers: usize,
    pub conditioned: usize,
    pub depth: usize,
    pub by_name: BTreeMap<String, usize>,
}

impl Circuit {
    pub fn n_qubits(&self) -> u32 {
        self.qregs.iter().map(|r| r.size).sum()
    }

    pub fn n_clbits(&self) -> u32 {
        self.cregs.iter().map(|r| r.size).sum()
    }

    /// Appends an unconditioned operation.
    pub fn push(&mut self, op: Op) {
        self.instrs.push(Instr {
            op,
            condition: None,
        });
    }

    /// A circuit with one quantum register `q` of `n` qubits and, if `m > 0`, one
    /// classical register `c` of `m` bits.
    pub fn with_registers(n: u32, m: u32) -> Circuit {
        let mut c = Circuit {
            qregs: vec![Register {
                name: "q".into(),
                offset: 0,
                size: n,
            }],
            ..Circuit::default()
        };
        if m > 0 {
            c.cregs.push(Register {
                name: "c".into(),
                offset: 0,
                size: m,
            });
        }
        c
    }

    /// Counts per gate name, total operations and depth (each operation occupies
    /// its qubits, its clbit, and for a condition every clbit of the register; barriers
    /// take no time). Cost linear in the number of operations.
    pub fn summary(&self) -> Summary {
        let mut by_name = BTreeMap::new();
        let mut s = Summary {
            qubits: self.n_qubits(),
            bits: self.n_clbits(),
            ops: 0,
            two_qubit_ops: 0,
            multi_qubit_ops: 0,
            measurements: 0,
            barriers: 0,
            conditioned: 0,
            depth: 0,
            by_name: BTreeMap::new(),
        };
        let mut q_level = vec![0usize; self.n_qubits() as usize];
        let mut c_level = vec![0usize; self.n_clbits() as usize];
        for instr in &self.instrs {
            let name = match &instr.op {
                Op::Gate { gate, .. } => gate.kind.name(),
                Op::Opaque { decl, .. } => self.opaque[*decl as usize].name.as_str(),
                Op::Measure { .. } => "measure",
                Op::Reset { .. } => "reset",
                Op::Barrier { .. } => {
                    s.barriers += 1;
                    continue;
                }
            };
            *by_name.entry(name.to_string()).or_insert(0) += 1;
            s.ops += 1;
            let qs = instr.op.qubits();
            match qs.len() {
                2 => s.two_qubit_ops += 1,
                n if n > 2 => s.multi_qubit_ops += 1,
                _ => {}
            }
            let mut clbits: Vec<usize> = Vec::new();
            if let Op::Measure { clbit, .. } = instr.op {
                s.measurements += 1;
                clbits.push(clbit.0 as usize);
            }
            if let Some(cond) = &instr.condition {
                s.conditioned += 1;
                let r = &self.cregs[cond.creg as usize];
                clbits.extend((r.offset..r.offset + r.size).map(|b| b as usize));
            }
            let start = qs
                .iter()
                .map(|q| q_level[q.0 as usize])
                .chain(clbits.iter().map(|&b| c_level[b]))
                .max()
                .unwrap_or(0);
            for q in qs {
                q_level[q.0 as usize] = start + 1;
            }
            for b in clbits {
                c_level[b] = start + 1;
            }
            s.depth = s.depth.max(start + 1);
        }
        s.by_name = by_name;
        s
    }

    fn qubit_name(&self, q: Qubit) -> String {
        register_name(&self.qregs, q.0)
    }

    fn clbit_name(&self, b: Clbit) -> String {
        register_name(&self.cregs, b.0)
    }
}

fn register_name(regs: &[Register], index: u32) -> String {
    for r in regs {
        if index >= r.offset && index < r.offset + r.size {
            return format!("{}[{}]", r.name, index - r.offset);
        }
    }
    format!("?[{index}]")
}

/// Formats a real so that it reads back to the same `f64` (shortest round-trip form).
pub fn format_real(v: f64) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    let s = format!("{v:?}");
    // `{:?}` prints e.g. `1e-7`; OpenQASM accepts that exponent form.
    s
}

impl fmt::Display for Circuit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "OPENQASM 2.0;")?;
        writeln!(f, "include \"qelib1.inc\";")?;
        for d in &self.opaque {
            let params: Vec<String> = (0..d.n_params).map(|i| format!("p{i}")).collect();
            let args: Vec<String> = (0..d.n_qubits).map(|i| format!("a{i}")).collect();
            if params.is_empty() {
                writeln!(f, "opaque {} {};", d.name, args.join(","))?;
            } else {
                writeln!(
                    f,
                    "opaque {}({}) {};",
                    d.name,
                    params.join(","),
                    args.join(",")
                )?;
            }
        }
        for r in &self.qregs {
            writeln!(f, "qreg {}[{}];", r.name, r.size)?;
        }
        for r in &self.cregs {
            writeln!(f, "creg {}[{}];", r.name, r.size)?;
        }
        for instr in &self.instrs {
            if let Some(cond) = &instr.condition {
                write!(
                    f,
                    "if({}=={}) ",
                    self.cregs[cond.creg as usize].name, cond.value
                )?;
            }
            let qubit_list = |qs: &[Qubit]| -> String {
                qs.iter()
                    .map(|q| self.qubit_name(*q))
                    .collect::<Vec<_>>()
                    .join(",")
            };
            let param_list = |ps: &[f64]| -> String {
                if ps.is_empty() {
                    String::new()
                } else {
                    let v: Vec<String> = ps.iter().map(|p| format_real(*p)).collect();
                    format!("({})", v.join(","))
                }
            };
            match &instr.op {
                Op::Gate { gate, qubits } => writeln!(
                    f,
                    "{}{} {};",
                    gate.kind.name(),
                    param_list(gate.params()),
                    qubit_list(qubits)
                )?,
                Op::Opaque {
                    decl,
                    params,
                    qubits,
                } => writeln!(
                    f,
                    "{}{} {};",
                    self.opaque[*decl as usize].name,
                    param_list(params),
                    qubit_list(qubits)
                )?,
                Op::Measure { qubit, clbit } => writeln!(
                    f,
                    "measure {} -> {};",
                    self.qubit_name(*qubit),
                    self.clbit_name(*clbit)
                )?,
                Op::Reset { qubit } => writeln!(f, "reset {};", self.qubit_name(*qubit))?,
                Op::Barrier { qubits } => writeln!(f, "barrier {};", qubit_list(qubits))?,
            }
        }
        Ok(())
    }
}
