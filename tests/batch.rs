//! `tutti batch` and `tutti merge`, through the command line: rows, diagnostics and
//! exit codes of a mixed suite; parts merged equal the whole run; a killed run
//! resumed equals an uninterrupted one; a sweep's comparison and its chart, drawn by
//! a real SVG renderer (resvg).

mod common;

use common::{render_svg, run_tutti as tutti, text, walk};

use std::path::{Path, PathBuf};
use std::process::Command;

/// A suite of small circuits from circuits/ in `dir`, some in a subfolder.
fn small_suite(dir: &Path, names: &[&str]) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("circuits");
    std::fs::create_dir_all(dir.join("sub")).unwrap();
    for (i, n) in names.iter().enumerate() {
        let to = if i % 3 == 2 {
            dir.join("sub").join(n)
        } else {
            dir.join(n)
        };
        std::fs::copy(root.join(n), to).unwrap();
    }
}

const SMALL: [&str; 9] = [
    "bv_8.qasm",
    "cswap_3.qasm",
    "deutsch_jozsa_6.qasm",
    "ghz_5.qasm",
    "grover_3.qasm",
    "qaoa_ring_6.qasm",
    "qft_3.qasm",
    "teleport_3.qasm",
    "toffoli_3.qasm",
];

/// The CSV without its timing columns (the last two).
fn csv_without_timing(path: &Path) -> String {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| {
            let cells: Vec<&str> = l.rsplitn(3, ',').collect();
            cells.last().unwrap().to_string()
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The Markdown summary without the timing columns of its row table (the last two
/// cells of each row of that table) and without the tool line.
fn md_without_timing(path: &Path) -> String {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| {
            if l.starts_with("| ") && l.ends_with(" |") && l.matches('|').count() > 12 {
                let cells: Vec<&str> = l.split('|').collect();
                cells[..cells.len() - 3].join("|")
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The JSON summary with the timing keys removed.
fn json_without_timing(path: &Path) -> serde_json::Value {
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    for row in v["rows"].as_array_mut().unwrap() {
        let row = row.as_object_mut().unwrap();
        row.remove("compile_s");
        row.remove("verify_s");
    }
    v
}

fn assert_same_summaries(a: &Path, b: &Path) {
    assert_eq!(
        csv_without_timing(&a.join("summary.csv")),
        csv_without_timing(&b.join("summary.csv"))
    );
    assert_eq!(
        md_without_timing(&a.join("summary.md")),
        md_without_timing(&b.join("summary.md"))
    );
    assert_eq!(
        json_without_timing(&a.join("summary.json")),
        json_without_timing(&b.join("summary.json"))
    );
}

#[test]
fn a_mixed_suite_gives_a_row_per_file_located_diagnostics_and_exit_1() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &["ghz_5.qasm", "qft_3.qasm", "bv_8.qasm"]);
    // Malformed: a missing `;` at the end of line 4 (the parser names line 5,
    // column 1, where `cx` stands, or the end of line 4).
    std::fs::write(
        suite.join("bad.qasm"),
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nh q[0]\ncx q[0],q[1];\n",
    )
    .unwrap();
    // Too large to verify in 1 MiB: an 8-qubit circuit, not Clifford (its windows
    // need 2 MiB unitaries).
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("circuits/qft_8.qasm"),
        suite.join("big.qasm"),
    )
    .unwrap();
    // Not a circuit file: ignored.
    std::fs::write(suite.join("notes.txt"), "not a circuit").unwrap();
    let out = tmp.path().join("out");
    let o = tutti(&[
        "batch",
        suite.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--memory",
        "1",
        "--jobs",
        "2",
    ]);
    let stderr = text(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{stderr}");
    let csv = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let rows: Vec<&str> = csv.lines().skip(1).collect();
    assert_eq!(rows.len(), 5, "{csv}");
    let row = |name: &str| *rows.iter().find(|r| r.starts_with(name)).unwrap();
    assert!(row("suite/bad.qasm").contains(",failed,"), "{csv}");
    assert!(
        row("suite/bad.qasm").contains("bad.qasm:4:7: expected `;`"),
        "{csv}"
    );
    assert!(row("suite/big.qasm").contains(",failed,"), "{csv}");
    assert!(
        row("suite/big.qasm").contains("more than the budget of 1048576 bytes"),
        "{csv}"
    );
    for good in [
        "suite/qft_3.qasm",
        "suite/ghz_5.qasm",
        "suite/sub/bv_8.qasm",
    ] {
        assert!(row(good).contains(",verified,"), "{csv}");
    }
    // The failures are listed on the terminal too, with their places.
    assert!(stderr.contains("2 job(s) failed"), "{stderr}");
    assert!(stderr.contains("bad.qasm:4:7"), "{stderr}");
    // Outputs mirror the inputs; failed jobs wrote none.
    assert!(out
        .join("demo-collective-duration/suite/sub/bv_8.pulses")
        .is_file());
    assert!(!out
        .join("demo-collective-duration/suite/bad.pulses")
        .exists());
    // Not a terminal: one plain progress line per job.
    assert_eq!(stderr.matches("] suite/").count(), 5, "{stderr}");
    // The compiled outputs are what `check` proves equal to their circuits.
    let c = tutti(&[
        "check",
        suite.join("sub/bv_8.qasm").to_str().unwrap(),
        out.join("demo-collective-duration/suite/sub/bv_8.pulses")
            .to_str()
            .unwrap(),
    ]);
    assert_eq!(c.status.code(), Some(0), "{}", text(&c.stdout));
}

#[test]
fn every_job_succeeding_exits_0_and_a_rerun_skips_them_all() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL[..4]);
    let out = tmp.path().join("out");
    let args = [
        "batch",
        suite.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ];
    let first = tutti(&args);
    assert_eq!(first.status.code(), Some(0), "{}", text(&first.stderr));
    let before = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let again = tutti(&args);
    assert_eq!(again.status.code(), Some(0));
    assert!(
        text(&again.stderr).contains("4 job(s): 0 run, 4 skipped"),
        "{}",
        text(&again.stderr)
    );
    // Skipped jobs keep their rows, timing included.
    assert_eq!(
        before,
        std::fs::read_to_string(out.join("summary.csv")).unwrap()
    );
    // A changed input is run again, the others are not.
    let changed = suite.join("bv_8.qasm");
    let mut t = std::fs::read_to_string(&changed).unwrap();
    t.push_str("\nbarrier q;\n");
    std::fs::write(&changed, t).unwrap();
    let third = tutti(&args);
    assert!(
        text(&third.stderr).contains("4 job(s): 1 run, 3 skipped"),
        "{}",
        text(&third.stderr)
    );
    // Another objective is another setting: nothing to skip.
    let fourth = tutti(&[&args[..], &["--objective", "area"]].concat());
    assert!(
        text(&fourth.stderr).contains("4 job(s): 4 run, 0 skipped"),
        "{}",
        text(&fourth.stderr)
    );
}

#[test]
fn merged_parts_equal_the_whole_run_whatever_the_jobs() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL);
    let s = suite.to_str().unwrap();
    let whole = tmp.path().join("whole");
    let sweep = ["--compiler", "baseline", "--compiler", "optimizer"];
    let o = tutti(
        &[
            &["batch", s, "--out", whole.to_str().unwrap(), "--jobs", "2"][..],
            &sweep,
        ]
        .concat(),
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let mut parts: Vec<PathBuf> = Vec::new();
    for k in 1..=3 {
        let dir = tmp.path().join(format!("part{k}"));
        let spec = format!("{k}/3");
        let o = tutti(
            &[
                &[
                    "batch",
                    s,
                    "--out",
                    dir.to_str().unwrap(),
                    "--jobs",
                    "1",
                    "--part",
                    &spec,
                ][..],
                &sweep,
            ]
            .concat(),
        );
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        let rows = std::fs::read_to_string(dir.join("summary.csv"))
            .unwrap()
            .lines()
            .count()
            - 1;
        assert_eq!(rows, 6, "three circuits, two settings per part");
        parts.push(dir);
    }
    let merged = tmp.path().join("merged");
    let mut args = vec!["merge".to_string()];
    args.extend(parts.iter().map(|d| d.display().to_string()));
    args.extend(["--out".to_string(), merged.display().to_string()]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = tutti(&args);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert_same_summaries(&whole, &merged);
    // The chart depends on no timing: byte for byte.
    assert_eq!(
        std::fs::read(whole.join("summary.svg")).unwrap(),
        std::fs::read(merged.join("summary.svg")).unwrap()
    );
    // Every output is there, the same bytes.
    for n in SMALL.iter().take(2) {
        let rel = format!(
            "demo-collective-duration/suite/{}",
            n.replace(".qasm", ".pulses")
        );
        assert_eq!(
            std::fs::read(whole.join(&rel)).unwrap(),
            std::fs::read(merged.join(&rel)).unwrap(),
            "{rel}"
        );
    }
    // Merging runs of different sweeps is refused.
    let other = tmp.path().join("other");
    let o = tutti(&[
        "batch",
        s,
        "--out",
        other.to_str().unwrap(),
        "--part",
        "1/3",
    ]);
    assert_eq!(o.status.code(), Some(0));
    let o = tutti(&[
        "merge",
        parts[1].to_str().unwrap(),
        other.to_str().unwrap(),
        "--out",
        tmp.path().join("bad").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("other settings"),
        "{}",
        text(&o.stderr)
    );
}

#[test]
fn a_run_killed_part_way_and_resumed_gives_the_uninterrupted_summary() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL);
    let s = suite.to_str().unwrap();
    let sweep = [
        "--compiler",
        "baseline",
        "--compiler",
        "optimizer",
        "--jobs",
        "1",
    ];
    let whole = tmp.path().join("whole");
    let o = tutti(&[&["batch", s, "--out", whole.to_str().unwrap()][..], &sweep].concat());
    assert_eq!(o.status.code(), Some(0));

    let killed = tmp.path().join("killed");
    let mut child = Command::new(env!("CARGO_BIN_EXE_tutti"))
        .args([&["batch", s, "--out", killed.to_str().unwrap()][..], &sweep].concat())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // Kill it as soon as its first job has finished (its record is written).
    let records = killed.join("records");
    let count = |d: &Path| {
        walk(d)
            .iter()
            .filter(|p| p.extension().is_some_and(|e| e == "json"))
            .count()
    };
    loop {
        if count(&records) >= 1 {
            break;
        }
        if let Some(status) = child.try_wait().unwrap() {
            panic!("the run ended before it could be killed: {status}");
        }
        std::thread::sleep(std::time::Duration::from_millis(2));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    let finished = count(&records);
    assert!(
        finished < 18,
        "the run was not stopped part-way ({finished} jobs done)"
    );
    // Nothing half-written: every file present parses.
    for p in walk(&records) {
        let text = std::fs::read_to_string(&p).unwrap();
        serde_json::from_str::<serde_json::Value>(&text).unwrap();
    }
    let o = tutti(&[&["batch", s, "--out", killed.to_str().unwrap()][..], &sweep].concat());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let stderr = text(&o.stderr);
    assert!(
        stderr.contains(&format!(
            "18 job(s): {} run, {finished} skipped",
            18 - finished
        )),
        "{stderr}"
    );
    assert_same_summaries(&whole, &killed);
    // No temporary file is left behind.
    assert!(walk(&killed).iter().all(|p| !p
        .file_name()
        .unwrap()
        .to_string_lossy()
        .starts_with(".tutti-")));
}

#[test]
fn a_two_setting_sweep_gives_the_comparison_and_a_chart_a_renderer_draws() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL[..6]);
    let out = tmp.path().join("out");
    let o = tutti(&[
        "batch",
        suite.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--compiler",
        "baseline",
        "--compiler",
        "optimizer",
        "--chart",
        "ms_pulses",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let stdout = text(&o.stdout);
    assert!(stdout.contains("ratio to the first setting"), "{stdout}");
    let md = std::fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(md.contains("## Comparison"), "{md}");
    // The reference's ratio is 1; the optimizer's pulse ratio is below 1 (it never
    // uses more MS pulses than the baseline on these circuits).
    let line = |s: &str| {
        md.lines()
            .find(|l| l.starts_with(&format!("| {s} |")))
            .unwrap()
            .to_string()
    };
    assert!(line("demo-collective-baseline").contains("(1.000)"), "{md}");
    let opt = line("demo-collective-duration");
    let pulses_ratio: f64 = opt
        .split('(')
        .nth(1)
        .unwrap()
        .split(')')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!(pulses_ratio < 1.0, "{opt}");

    let svg = std::fs::read_to_string(out.join("summary.svg")).unwrap();
    let pixmap = render_svg(&svg, "summary-chart");
    let pixels = pixmap.pixels();
    let non_white = pixels
        .iter()
        .filter(|p| (p.red(), p.green(), p.blue()) != (255, 255, 255))
        .count();
    assert!(non_white > pixels.len() / 100, "the chart is nearly blank");
    // One marker colour per setting is drawn: the first two of the palette.
    let has = |rgb: (u8, u8, u8)| {
        pixels.iter().any(|p| {
            let c = p.demultiply();
            (c.red(), c.green(), c.blue()) == rgb && c.alpha() == 255
        })
    };
    let blended = |rgb: (u8, u8, u8)| {
        // Markers are drawn at 0.85 opacity over the strips: look for the hue.
        pixels.iter().any(|p| {
            let (r, g, b) = (p.red() as i32, p.green() as i32, p.blue() as i32);
            let (tr, tg, tb) = (rgb.0 as i32, rgb.1 as i32, rgb.2 as i32);
            let near = |x: i32, t: i32| (x - (t * 85 + 255 * 15) / 100).abs() <= 12;
            near(r, tr) && near(g, tg) && near(b, tb)
        })
    };
    assert!(
        has((0, 0x72, 0xB2)) || blended((0, 0x72, 0xB2)),
        "no marker of the first setting"
    );
    assert!(
        has((0xE6, 0x9F, 0)) || blended((0xE6, 0x9F, 0)),
        "no marker of the second setting"
    );
    // One strip per circuit: the label of each is in the picture's source.
    for n in &SMALL[..6] {
        assert!(svg.contains(n.trim_end_matches(".qasm")), "{n}");
    }
}

#[test]
fn hostile_arguments_are_usage_errors_and_lose_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL[..1]);
    let s = suite.to_str().unwrap();
    // The output folder is a file: refused, the file untouched.
    let file = tmp.path().join("a-file");
    std::fs::write(&file, "keep me").unwrap();
    let o = tutti(&["batch", s, "--out", file.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    assert_eq!(std::fs::read_to_string(&file).unwrap(), "keep me");
    for bad in ["0/3", "4/3", "x/3", "3"] {
        let o = tutti(&[
            "batch",
            s,
            "--out",
            tmp.path().join("o").to_str().unwrap(),
            "--part",
            bad,
        ]);
        assert_eq!(o.status.code(), Some(2), "--part {bad}");
        assert!(text(&o.stderr).contains("--part"), "{}", text(&o.stderr));
    }
    let o = tutti(&[
        "batch",
        s,
        "--out",
        tmp.path().join("o").to_str().unwrap(),
        "--chart",
        "speed",
    ]);
    assert_eq!(o.status.code(), Some(2));
    let o = tutti(&[
        "batch",
        tmp.path().join("missing").to_str().unwrap(),
        "--out",
        tmp.path().join("o").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("missing"), "{}", text(&o.stderr));
    let o = tutti(&[
        "merge",
        suite.to_str().unwrap(),
        "--out",
        tmp.path().join("m").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("not a batch output"),
        "{}",
        text(&o.stderr)
    );
}

#[test]
fn folders_are_searched_once_links_stay_inside_the_tree() {
    let tmp = tempfile::tempdir().unwrap();
    let suite = tmp.path().join("suite");
    small_suite(&suite, &SMALL[..3]);
    let outside = tmp.path().join("outside");
    std::fs::create_dir_all(&outside).unwrap();
    std::fs::copy(suite.join("bv_8.qasm"), outside.join("far.qasm")).unwrap();
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(outside.join("far.qasm"), suite.join("link-out.qasm")).unwrap();
        std::os::unix::fs::symlink(suite.join("bv_8.qasm"), suite.join("link-in.qasm")).unwrap();
        std::os::unix::fs::symlink(&suite, suite.join("sub").join("loop")).unwrap();
    }
    // The suite given twice, and one of its files again.
    let (found, notes) =
        tutti::batch::discover(&[suite.clone(), suite.clone(), suite.join("cswap_3.qasm")])
            .unwrap();
    let keys: Vec<&str> = found.iter().map(|i| i.key.as_str()).collect();
    #[cfg(unix)]
    {
        // link-in.qasm is bv_8.qasm reached twice: taken once, under the name met
        // first in path order (bv_8 sorts before link-in).
        assert_eq!(
            keys,
            [
                "suite/bv_8.qasm",
                "suite/cswap_3.qasm",
                "suite/sub/deutsch_jozsa_6.qasm"
            ]
        );
        assert!(
            notes.iter().any(|n| n.contains("link-out.qasm")),
            "{notes:?}"
        );
    }
    #[cfg(not(unix))]
    let _ = (keys, notes);
}

#[test]
fn circuits_and_the_vendored_outside_circuits_compile_and_verify_in_one_batch_run() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    let o = tutti(&[
        "batch",
        root.join("circuits").to_str().unwrap(),
        root.join("tests/data/qasmbench").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let expected = walk(&root.join("circuits"))
        .into_iter()
        .chain(walk(&root.join("tests/data/qasmbench")))
        .filter(|p| p.extension().is_some_and(|e| e == "qasm"))
        .count();
    let csv = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let rows: Vec<&str> = csv.lines().skip(1).collect();
    assert_eq!(rows.len(), expected);
    assert!(expected >= 50, "{expected} circuits");
    assert!(rows.iter().all(|r| r.contains(",verified,")), "{csv}");
}

/// A batch job's thread may wait for the shared memory pool; rayon's workers may not
/// (they are refused, to avoid a deadlock). So the proof window by window must stay
/// on the job's thread even when the budget is taken alongside it. Here the whole
/// pool is held elsewhere when the compile reaches the windows, and given back a
/// moment later: the compile waits and verifies (found when the budget first ran
/// alongside the proof through rayon::join, which moved the proof onto a worker, and
/// a batch under load reported "needs 1048576 bytes, more than the budget").
/// A 5-qubit circuit long enough that its sequence is compared window by window
/// under a budget of `bytes` = 1 MiB (twelve rounds of ghz_5's Hadamard and CNOT
/// chain: about 1700 steps on 40 ions, about 1.3 KB each to lower), and a compile
/// configuration whose checks share one pool of that size.
fn ghz_rounds_with_a_pool_of(
    bytes: usize,
) -> (
    tutti::circuit::Circuit,
    tutti::driver::CompileConfig,
    tutti::memory::SharedPool,
) {
    use std::sync::Arc;
    use tutti::memory::{Pool, SharedPool};
    let pool = SharedPool(Arc::new(Pool::new(bytes)));
    let mut text = String::from("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[5];\n");
    for round in 0..12 {
        text.push_str(&format!("h q[{}];\n", round % 5));
        for k in 0..4 {
            text.push_str(&format!("cx q[{k}],q[{}];\n", k + 1));
        }
    }
    let circuit = tutti::qasm::read_str("ghz_rounds.qasm", &text)
        .circuit
        .expect("reads");
    let mut cfg = tutti::driver::CompileConfig::default();
    cfg.check.memory_budget = bytes;
    cfg.check.pool = Some(pool.clone());
    (circuit, cfg, pool)
}

#[test]
fn the_window_proof_waits_for_a_busy_shared_pool() {
    use std::sync::mpsc;
    use tutti::driver::{compile_with, Stage};
    let mib = 1usize << 20;
    let (circuit, cfg, pool) = ghz_rounds_with_a_pool_of(mib);
    let held = pool.0.reserve(mib).expect("the whole pool");
    let (tx, rx) = mpsc::channel();
    let profile = tutti::native::profile::Profile::demo();
    std::thread::scope(|scope| {
        // The sender moves into the job: a compile that ends without reaching the
        // windows drops it, and the wait below fails instead of hanging.
        let job = scope.spawn(move || {
            compile_with(&circuit, &profile, &cfg, &mut |s| {
                if s == Stage::VerifyWindows {
                    let _ = tx.send(());
                }
            })
        });
        rx.recv().expect("the compile goes window by window");
        std::thread::sleep(std::time::Duration::from_millis(300));
        drop(held);
        let out = job
            .join()
            .expect("no panic")
            .expect("waited, then verified");
        assert!(out.verification.is_some());
    });
}

/// The other side of the test above: a window proof started on a rayon worker,
/// which may not wait for the shared pool, is refused while the pool is taken, and
/// the refusal says so (busy, how much it asked for and how much was free), not
/// that a comparison of 0 qubits was too large for the budget.
#[test]
fn a_refusal_by_a_busy_pool_says_it_was_busy() {
    use tutti::driver::compile;
    use tutti::sim::CheckError;
    let mib = 1usize << 20;
    let (circuit, cfg, pool) = ghz_rounds_with_a_pool_of(mib);
    let profile = tutti::native::profile::Profile::demo();
    let held = pool.0.reserve(mib - 4096).expect("most of the pool");
    let workers = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let Err(err) = workers.install(|| compile(&circuit, &profile, &cfg)) else {
        panic!("verified although the pool was taken");
    };
    let text = err.to_string();
    let busy =
        std::iter::successors(Some(&err as &dyn std::error::Error), |e| e.source()).any(|e| {
            e.downcast_ref::<CheckError>().is_some_and(|c| {
                matches!(
                    c.refusal(),
                    CheckError::Busy { free: 4096, total, .. } if *total == mib
                )
            })
        });
    assert!(busy, "{text}");
    assert!(
        text.contains("was busy") && text.contains("4096 of 1048576 were free"),
        "{text}"
    );
    assert!(!text.contains("0 qubits"), "{text}");
    drop(held);
    // Given back, the same compile on the same workers verifies.
    let out = workers
        .install(|| compile(&circuit, &profile, &cfg))
        .expect("verified once the pool is free");
    assert!(out.verification.is_some());
}
