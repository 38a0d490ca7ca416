//! What a finished job leaves behind so that a re-run can skip it (its row, the
//! digests of every file it read, the digest of its options), the clean-up after a
//! killed run, and `merge`, which joins the records and outputs of several runs.

use super::*;

/// A finished job: its row, and what it was computed from.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub(super) struct Record {
    pub(super) options: String,
    pub(super) sources: Vec<SourceDigest>,
    pub(super) output: Option<String>,
    pub(super) row: Row,
}

/// The digest of everything but the inputs that a job's result depends on.
pub(super) fn options_digest(cfg: &BatchConfig, setting: &Setting) -> String {
    let profile = if setting.device == "demo" {
        driver::sha256_hex(crate::native::profile::DEMO_TOML.as_bytes())
    } else {
        std::fs::read(&setting.device)
            .map(|b| driver::sha256_hex(&b))
            .unwrap_or_else(|e| format!("unreadable: {e}"))
    };
    let text = serde_json::json!({
        "tool": cfg.tool,
        "setting": setting,
        "profile": profile,
        "verify": cfg.verify,
        "max_steps": cfg.max_steps,
        "limits": format!("{:?}", Limits { max_threads: 1, ..cfg.limits }),
        "memory": cfg.memory_given.then_some(cfg.memory),
        "format": cfg.format.name(),
    })
    .to_string();
    driver::sha256_hex(text.as_bytes())
}

pub(super) fn record_path(out: &Path, setting: &str, key: &str) -> PathBuf {
    let mut p = out.join("records").join(setting).join(key);
    p.set_extension("json");
    p
}

/// A record still valid: same options, every file read unchanged, output present.
pub(super) fn current_record(path: &Path, options: &str, out_dir: &Path) -> Option<Record> {
    let text = std::fs::read_to_string(path).ok()?;
    let record: Record = serde_json::from_str(&text).ok()?;
    if record.options != options || record.row.status == Status::Failed {
        return None;
    }
    for s in &record.sources {
        let bytes = std::fs::read(&s.path).ok()?;
        if driver::sha256_hex(&bytes) != s.sha256 {
            return None;
        }
    }
    if let Some(o) = &record.output {
        if !out_dir.join(o).is_file() {
            return None;
        }
    }
    Some(record)
}

/// Removes the temporary files (`.tutti-*.tmp`) a killed run left under `dir`:
/// they were never renamed into place, so nothing finished is lost.
pub(super) fn remove_stale_temporaries(dir: &Path) {
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(entries) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            let Ok(t) = e.file_type() else { continue };
            let name = e.file_name();
            let name = name.to_string_lossy();
            if t.is_dir() {
                stack.push(e.path());
            } else if t.is_file() && name.starts_with(".tutti-") && name.ends_with(".tmp") {
                let _ = std::fs::remove_file(e.path());
            }
        }
    }
}

pub(super) fn write_record(
    cfg: &BatchConfig,
    setting: &str,
    key: &str,
    record: &Record,
) -> Result<(), String> {
    let text = serde_json::to_string_pretty(record).map_err(|e| e.to_string())?;
    write_atomic(&record_path(&cfg.out, setting, key), &(text + "\n"))
}

/// Joins the outputs of several runs (parts) into `out`: every row and output
/// copied, and one summary. The runs must have the same settings; a job present in
/// two runs must have the same row (but for timing).
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<BatchOutcome, String> {
    let mut manifest: Option<Manifest> = None;
    let mut records: Vec<(String, Record, PathBuf)> = Vec::new();
    for dir in dirs {
        let text = std::fs::read_to_string(dir.join("batch.json"))
            .map_err(|e| format!("{}: not a batch output ({e})", dir.display()))?;
        let m: Manifest = serde_json::from_str(&text)
            .map_err(|e| format!("{}/batch.json: {e}", dir.display()))?;
        match &manifest {
            None => manifest = Some(m.clone()),
            Some(first) if first.settings != m.settings => {
                return Err(format!(
                    "{} was run with other settings than {}; merge runs of one sweep only",
                    dir.display(),
                    dirs[0].display()
                ))
            }
            Some(_) => {}
        }
        let root = dir.join("records");
        let mut stack = vec![root.clone()];
        while let Some(d) = stack.pop() {
            let Ok(entries) = std::fs::read_dir(&d) else {
                continue;
            };
            for e in entries.flatten() {
                let p = e.path();
                let Ok(t) = e.file_type() else { continue };
                if t.is_dir() {
                    stack.push(p);
                } else if t.is_file() && p.extension().is_some_and(|x| x == "json") {
                    let text =
                        std::fs::read_to_string(&p).map_err(|e| format!("{}: {e}", p.display()))?;
                    let rec: Record =
                        serde_json::from_str(&text).map_err(|e| format!("{}: {e}", p.display()))?;
                    let rel = p
                        .strip_prefix(&root)
                        .unwrap_or(&p)
                        .to_string_lossy()
                        .into_owned();
                    records.push((rel, rec, dir.clone()));
                }
            }
        }
    }
    let Some(mut manifest) = manifest else {
        return Err("nothing to merge".into());
    };
    manifest.part = None;
    records.sort_by(|a, b| a.0.cmp(&b.0));
    let mut kept: Vec<(String, Record, PathBuf)> = Vec::new();
    for r in records {
        if let Some(last) = kept.last() {
            if last.0 == r.0 {
                if !last.1.row.same_result(&r.1.row) {
                    return Err(format!(
                        "{} and {} hold different results for {} ({})",
                        last.2.display(),
                        r.2.display(),
                        r.1.row.path,
                        r.1.row.setting
                    ));
                }
                continue;
            }
        }
        kept.push(r);
    }
    std::fs::create_dir_all(out).map_err(|e| format!("cannot create {}: {e}", out.display()))?;
    for (rel, rec, dir) in &kept {
        if let Some(o) = &rec.output {
            let from = dir.join(o);
            let text =
                std::fs::read_to_string(&from).map_err(|e| format!("{}: {e}", from.display()))?;
            write_atomic(&out.join(o), &text)?;
        }
        let text = serde_json::to_string_pretty(rec).map_err(|e| e.to_string())?;
        write_atomic(&out.join("records").join(rel), &(text + "\n"))?;
    }
    let text = serde_json::to_string_pretty(&manifest).map_err(|e| e.to_string())?;
    write_atomic(&out.join("batch.json"), &(text + "\n"))?;
    let order: Vec<String> = manifest.settings.iter().map(Setting::name).collect();
    let mut rows: Vec<Row> = kept.into_iter().map(|(_, r, _)| r.row).collect();
    rows.sort_by(|a, b| {
        let pos = |r: &Row| {
            order
                .iter()
                .position(|s| *s == r.setting)
                .unwrap_or(usize::MAX)
        };
        a.path.cmp(&b.path).then(pos(a).cmp(&pos(b)))
    });
    let written = summary::write_all(out, &manifest, &rows)?;
    Ok(BatchOutcome {
        rows,
        skipped: 0,
        notes: Vec::new(),
        written,
    })
}
