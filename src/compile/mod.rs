//! Compilation from circuits to native sequences: lowering to the canonical form
//! (`lower`), the reference compiler (`baseline`), coupling synthesis over sign
//! vectors (`couple`, with the Hadamard matrices of `hadamard`), and the optimizer
//! (`optimize`, docs/optimizer.md).

pub mod baseline;
pub mod couple;
pub mod hadamard;
pub mod lower;
pub mod optimize;

pub use baseline::{
    compile_baseline, compile_baseline_bounded, compile_baseline_traced, CompileError, Target,
    DEFAULT_MAX_STEPS,
};
