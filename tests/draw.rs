//! `tutti draw`: the timeline of a sequence, rendered by a real SVG renderer
//! (resvg): not blank, one lane per ion, aggregated when long, zoomable; and its
//! timing model is the budget's.

mod common;

use common::{render_svg, run_tutti as tutti};

use std::path::Path;

/// The runs of lane-grey pixels (the even lanes' fill) down the column `x`, as
/// (first row, height).
fn grey_runs(p: &resvg::tiny_skia::Pixmap, x: u32) -> Vec<(u32, u32)> {
    let mut runs = Vec::new();
    let mut start = None;
    for y in 0..p.height() {
        let c = p.pixel(x, y).unwrap();
        let grey = (c.red(), c.green(), c.blue()) == (0xee, 0xf1, 0xf5);
        match (grey, start) {
            (true, None) => start = Some(y),
            (false, Some(s)) => {
                runs.push((s, y - s));
                start = None;
            }
            _ => {}
        }
    }
    if let Some(s) = start {
        runs.push((s, p.height() - s));
    }
    runs
}

fn non_white(p: &resvg::tiny_skia::Pixmap) -> usize {
    p.pixels()
        .iter()
        .filter(|c| (c.red(), c.green(), c.blue()) != (255, 255, 255))
        .count()
}

/// A hand-written sequence on 5 ions: a collective rotation, light shifts, an MS
/// pulse while ion 4 is hidden, and a measurement.
const HAND: &str = "ions 5
creg c[2]
chain_rotate pi/2 0
light_shift 0 pi/4
light_shift 2 pi
hide 4
chain_ms pi/2 0
unhide 4
frame_z pi/3
chain_rotate -pi/2 0
measure 0 -> c[0]
measure 1 -> c[1]
";

#[test]
fn a_hand_written_sequence_draws_one_lane_per_ion_with_its_marks() {
    let tmp = tempfile::tempdir().unwrap();
    let seq = tmp.path().join("hand.pulses");
    std::fs::write(&seq, HAND).unwrap();
    let out = tmp.path().join("hand.svg");
    let o = tutti(&["draw", seq.to_str().unwrap(), "-o", out.to_str().unwrap()]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let svg = std::fs::read_to_string(&out).unwrap();
    assert_eq!(svg.matches("class=\"lane\"").count(), 5);
    // The MS pulse's area (pi/2 is one unit), and the hidden span of ion 4.
    assert!(svg.contains(">1.000<"), "{svg}");
    assert!(svg.contains("ion 4 hidden from"), "{svg}");
    // The MS bar covers ions 0..3 only: ion 4 is hidden.
    assert!(svg.contains("step 5: chain_ms"), "{svg}");
    let p = render_svg(&svg, "timeline-1");
    assert!(
        non_white(&p) > (p.width() * p.height()) as usize / 10,
        "nearly blank"
    );
    // Down the left margin, where only lanes are drawn: ions 0, 2, 4 are grey bands
    // of one lane height each (18 px for a short chain).
    let runs = grey_runs(&p, 3);
    assert_eq!(runs.len(), 3, "{runs:?}");
    assert!(runs.iter().all(|&(_, h)| h == 18), "{runs:?}");
    // Each kind of mark is drawn in its colour somewhere in the picture.
    for rgb in [(0x4C, 0x78, 0xA8), (0xB2, 0x79, 0xA2), (0x1F, 0x1F, 0x1F)] {
        assert!(
            p.pixels()
                .iter()
                .any(|c| (c.red(), c.green(), c.blue()) == rgb),
            "no mark of colour {rgb:?}"
        );
    }
}

#[test]
fn a_compiled_forty_ion_sequence_is_aggregated_and_a_range_zooms_in() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let tmp = tempfile::tempdir().unwrap();
    let seq = tmp.path().join("q.pulses");
    let o = tutti(&[
        "compile",
        root.join("circuits/qaoa_ring_6.qasm").to_str().unwrap(),
        "-o",
        seq.to_str().unwrap(),
        "--baseline",
    ]);
    assert_eq!(o.status.code(), Some(0));
    let whole = tutti(&["draw", seq.to_str().unwrap()]);
    assert_eq!(whole.status.code(), Some(0));
    let svg = String::from_utf8(whole.stdout).unwrap();
    assert!(
        svg.contains("aggregated"),
        "a sequence of thousands of steps is aggregated"
    );
    assert_eq!(svg.matches("class=\"lane\"").count(), 40);
    let p = render_svg(&svg, "timeline-2");
    assert!(non_white(&p) > (p.width() * p.height()) as usize / 10);
    assert_eq!(grey_runs(&p, 3).len(), 20, "40 lanes, every other one grey");
    // The first 300 us hold few enough steps to draw one by one.
    let zoom = tutti(&["draw", seq.to_str().unwrap(), "--from", "0", "--to", "300"]);
    assert_eq!(zoom.status.code(), Some(0));
    let svg = String::from_utf8(zoom.stdout).unwrap();
    assert!(!svg.contains("aggregated"));
    assert!(svg.contains("step 1: "), "marks carry their step numbers");
    let p = render_svg(&svg, "timeline-3");
    assert_eq!(grey_runs(&p, 3).len(), 20);
}

#[test]
fn bad_requests_are_usage_errors() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let tmp = tempfile::tempdir().unwrap();
    let seq = tmp.path().join("hand.pulses");
    std::fs::write(&seq, HAND).unwrap();
    let s = seq.to_str().unwrap();
    for args in [
        vec!["draw", s, "--from", "10", "--to", "5"],
        vec!["draw", s, "--from", "-1"],
        vec!["draw", root.join("circuits/ghz_5.qasm").to_str().unwrap()],
        vec!["draw", tmp.path().join("missing.pulses").to_str().unwrap()],
    ] {
        let o = tutti(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        assert!(!o.stderr.is_empty());
    }
    // An existing output is not replaced without --force.
    let out = tmp.path().join("keep.svg");
    std::fs::write(&out, "keep").unwrap();
    let o = tutti(&["draw", s, "-o", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "keep");
}

/// The timeline's end is the budget's duration (one timing model), on compiled
/// outputs of both targets.
#[test]
fn the_timeline_ends_where_the_budget_says() {
    use tutti::driver::{compile, CompileConfig};
    use tutti::native::budget::{budget, timeline};
    use tutti::native::profile::Profile;
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let profile = Profile::demo();
    for name in ["qft_5", "teleport_3", "ghz_12", "qaoa_ring_6"] {
        let text = std::fs::read_to_string(root.join(format!("circuits/{name}.qasm"))).unwrap();
        let c = tutti::qasm::read_str(name, &text).circuit.unwrap();
        for target in [
            tutti::compile::Target::Collective,
            tutti::compile::Target::Addressed,
        ] {
            let cfg = CompileConfig {
                target,
                verify: false,
                ..CompileConfig::default()
            };
            let seq = compile(&c, &profile, &cfg).unwrap().sequence;
            let end = timeline(&seq, &profile)
                .iter()
                .map(|s| s.start_us + s.duration_us)
                .fold(0.0, f64::max);
            let b = budget(&seq, &profile, c.n_qubits());
            assert!(
                (end - b.duration_us).abs() <= 1e-9 * b.duration_us,
                "{name}: timeline {end}, budget {}",
                b.duration_us
            );
        }
    }
}

/// Hostile sizes: a width out of range is a usage error; the widest picture of the
/// longest chain the formats allow, aggregated, stays within bounded memory.
#[test]
fn hostile_sizes_are_refused_or_bounded() {
    let tmp = tempfile::tempdir().unwrap();
    let seq = tmp.path().join("hand.pulses");
    std::fs::write(&seq, HAND).unwrap();
    for w in ["0", "299", "20001", "4000000000"] {
        let o = tutti(&["draw", seq.to_str().unwrap(), "--width", w]);
        assert_eq!(o.status.code(), Some(2), "--width {w}");
    }
    use tutti::native::{NativeOp, Sequence};
    let mut long = Sequence::new(4096, vec![]);
    for k in 0..3500u32 {
        long.push(NativeOp::LightShift {
            ion: k % 4096,
            theta: 0.1,
        });
        long.push(NativeOp::Collective {
            theta: 0.2,
            phi: 0.0,
        });
    }
    let profile = tutti::native::profile::Profile::demo();
    let opts = tutti::report::draw::DrawOptions {
        width: u32::MAX,
        ..Default::default()
    };
    let svg = tutti::report::draw::timeline_svg(&long, &profile, &opts).unwrap();
    assert!(svg.contains("aggregated"));
    assert_eq!(svg.matches("class=\"lane\"").count(), 4096);
    assert!(
        svg.contains("width=\"20000\""),
        "the width is held to the maximum"
    );
}
