//! Simulation and proof of equality: statevector kernels, the unitary builder, a
//! stabilizer tableau, and the equivalence checker that uses them.
//!
//! Invariant: the checker never reports "equivalent" without having compared the
//! two programs in the mode it names; programs it cannot compare are refused with
//! the reason.

pub mod apply;
pub mod equiv;
pub mod program;
mod simd;
pub mod state;
pub mod tableau;

pub use equiv::{
    check, check_counted, check_sequence_windows, check_windows, check_windows_counted,
    derived_tolerance, sync_points_from_origin, CheckConfig, CheckError, Mode, SyncPoint, Verdict,
    WindowVerdict, WorkCounter,
};
pub use program::{Item, Kernel, Program};
pub use simd::set_vector_kernels;
pub use state::StateVector;
