//! The optimizer's goals on the collective target over circuits/ (the project's own
//! targets, against its own baseline compiler; the README table shows the figures):
//! optimized `ms_area` and `duration_us` each at most half the baseline's in
//! geometric mean, and no circuit worse than the baseline on `ms_area`, `ms_pulses`
//! or `duration_us`. Every optimized output is verified by the driver on the way (a
//! compile whose output is not proven equal is an error).

mod common;

use tutti::compile::Target;
use tutti::driver::{compile, CompileConfig};
use tutti::native::profile::Profile;

#[test]
fn the_collective_target_meets_its_goals() {
    let profile = Profile::demo();
    let (mut area, mut duration, mut counted) = (0.0f64, 0.0f64, 0);
    let mut worse = Vec::new();
    for path in common::files("circuits", "qasm") {
        let circuit = common::read_ok(&path);
        let run = |baseline: bool| {
            let cfg = CompileConfig {
                target: Target::Collective,
                baseline,
                verify: !baseline,
                ..CompileConfig::default()
            };
            compile(&circuit, &profile, &cfg).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        };
        let (base, opt) = (run(true), run(false));
        // The driver returns an error unless the output proved equal.
        assert!(opt.verification.is_some(), "{}: verified", path.display());
        let (b, o) = (&base.budget, &opt.budget);
        area += (o.ms_area / b.ms_area).ln();
        duration += (o.duration_us / b.duration_us).ln();
        counted += 1;
        for (name, x, y) in [
            ("ms_area", b.ms_area, o.ms_area),
            ("ms_pulses", b.ms_pulses as f64, o.ms_pulses as f64),
            ("duration_us", b.duration_us, o.duration_us),
        ] {
            if y > x * (1.0 + 1e-9) {
                worse.push(format!("{} {name}: {x} -> {y}", path.display()));
            }
        }
    }
    assert!(counted >= 28, "{counted} circuits");
    let (area, duration) = (
        (area / counted as f64).exp(),
        (duration / counted as f64).exp(),
    );
    assert!(area <= 0.5, "ms_area geometric mean ratio {area:.3}");
    assert!(
        duration <= 0.5,
        "duration_us geometric mean ratio {duration:.3}"
    );
    assert!(worse.is_empty(), "worse than the baseline: {worse:?}");
}
