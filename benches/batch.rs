//! Suite throughput of `tutti batch` with 1 job and with 2 jobs in the same run,
//! and their ratio (the goal on a 2-core machine: at least 1.7). The suite is
//! circuits/ and the vendored QASMBench subset, compiled for both targets and
//! verified. Each run is a fresh process (its own thread pool) into a fresh folder.
//!
//! `cargo bench --bench batch`

use std::path::Path;
use std::time::Instant;

fn run(jobs: usize, out: &Path) -> (f64, usize) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let _ = std::fs::remove_dir_all(out);
    let started = Instant::now();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_tutti"))
        .args([
            "batch",
            root.join("circuits").to_str().unwrap(),
            root.join("tests/data/qasmbench").to_str().unwrap(),
            "--target",
            "collective",
            "--target",
            "addressed",
            "--jobs",
            &jobs.to_string(),
            "--out",
            out.to_str().unwrap(),
        ])
        .output()
        .expect("the binary runs");
    let secs = started.elapsed().as_secs_f64();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let rows = std::fs::read_to_string(out.join("summary.csv"))
        .unwrap()
        .lines()
        .count()
        - 1;
    (secs, rows)
}

fn main() {
    let tmp = tempfile::tempdir().unwrap();
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!("batch throughput ({cores} core(s) on this machine)");
    let mut best = [f64::INFINITY; 2];
    let mut jobs_done = 0;
    for round in 0..3 {
        for (k, jobs) in [1usize, 2].into_iter().enumerate() {
            let (secs, rows) = run(jobs, &tmp.path().join(format!("out-{jobs}-{round}")));
            jobs_done = rows;
            best[k] = best[k].min(secs);
            println!(
                "  round {round}, {jobs} job(s): {rows} jobs in {secs:.2} s ({:.1} jobs/s)",
                rows as f64 / secs
            );
        }
    }
    println!(
        "best of 3: 1 job {:.2} s ({:.1} jobs/s), 2 jobs {:.2} s ({:.1} jobs/s); ratio {:.2} (goal >= 1.7)",
        best[0],
        jobs_done as f64 / best[0],
        best[1],
        jobs_done as f64 / best[1],
        best[0] / best[1]
    );
}
