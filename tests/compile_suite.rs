//! Every circuit of circuits/ and every vendored outside circuit (QASMBench subset,
//! tests/data/qasmbench/PROVENANCE.md) compiles on both targets and the statevector
//! or tableau checker proves the output equal to the input.

mod common;

use rayon::prelude::*;
use std::path::PathBuf;
use tutti::compile::Target;
use tutti::driver::{compile, CompileConfig, DriverError};
use tutti::native::profile::Profile;
use tutti::sim::{CheckConfig, CheckError};

/// Files whose verification needs more statevector memory than the tests allow:
/// a 28-qubit non-Clifford adder. They must be refused with the memory needed,
/// never passed unverified.
const TOO_LARGE_TO_VERIFY: &[&str] = &["adder_n28.qasm"];

fn all_circuits() -> Vec<PathBuf> {
    let mut files = common::files("circuits", "qasm");
    assert!(
        files.len() >= 25,
        "circuits/ holds {} circuits",
        files.len()
    );
    files.extend(common::qasmbench_files());
    files
}

#[test]
fn every_circuit_compiles_and_verifies_on_both_targets() {
    let profile = Profile::demo();
    let failures: Vec<String> = all_circuits()
        .par_iter()
        .flat_map(|path| {
            let circuit = common::read_ok(path);
            let name = path.file_name().unwrap().to_string_lossy().into_owned();
            [Target::Collective, Target::Addressed]
                .into_iter()
                .filter_map(|target| {
                    let cfg = CompileConfig {
                        target,
                        check: CheckConfig {
                            memory_budget: 1 << 30,
                            ..CheckConfig::default()
                        },
                        ..CompileConfig::default()
                    };
                    match compile(&circuit, &profile, &cfg) {
                        Ok(c) => {
                            let v = c.verdict.expect("verification ran");
                            (!v.equivalent || TOO_LARGE_TO_VERIFY.contains(&name.as_str()))
                                .then(|| format!("{name} {target:?}: unexpected verdict {v:?}"))
                        }
                        Err(DriverError::Check(CheckError::TooLarge { .. }))
                            if TOO_LARGE_TO_VERIFY.contains(&name.as_str()) =>
                        {
                            None
                        }
                        Err(e) => Some(format!("{name} {target:?}: {e}")),
                    }
                })
                .collect::<Vec<_>>()
        })
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
