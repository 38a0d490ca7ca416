//! The vendored QASMBench circuits (Li, Stein, Krishnamoorthy, Ang, arXiv:2005.13018;
//! licence and provenance in tests/data/qasmbench/) all read, and their qubit and
//! expanded operation counts equal those computed independently by
//! `tools/count_qasmbench.py` (regular expressions over the text, no shared code),
//! stored in `tests/data/qasmbench/expected_counts.tsv`.

mod common;

#[test]
fn all_thirty_outside_circuits_read_with_independent_counts() {
    let table = std::fs::read_to_string("tests/data/qasmbench/expected_counts.tsv").unwrap();
    let mut rows = 0;
    for line in table.lines().skip(1) {
        let cols: Vec<&str> = line.split('\t').collect();
        let path = std::path::Path::new("tests/data/qasmbench").join(cols[0]);
        let circuit = common::read_ok(&path);
        let s = circuit.summary();
        assert_eq!(s.qubits.to_string(), cols[1], "{}: qubits", cols[0]);
        assert_eq!(s.ops.to_string(), cols[2], "{}: operations", cols[0]);
        rows += 1;
    }
    assert_eq!(rows, 30);
    assert_eq!(common::qasmbench_files().len(), 30);
}

#[test]
fn quirks_of_the_outside_files_are_read_as_their_provenance_note_says() {
    // sat_n11 has no header: a warning, not an error.
    let out = tutti::qasm::read_file(
        "tests/data/qasmbench/medium/sat_n11/sat_n11.qasm".as_ref(),
        &Default::default(),
    );
    assert!(out.circuit.is_some());
    assert!(out
        .diagnostics
        .iter()
        .any(|d| d.code == "missing-header" && !d.is_error()));
    // ipea_n2 has feed-forward and mid-circuit measurement.
    let c = common::read_ok("tests/data/qasmbench/small/ipea_n2/ipea_n2.qasm".as_ref());
    let s = c.summary();
    assert!(s.conditioned > 0 && s.by_name.get("reset").copied().unwrap_or(0) == 3);
}
