//! Every file of the bad-input corpus (tests/fixtures, described in its manifest.json) gives
//! either the expected table or an error whose message names the expected place; none
//! panics. Expected kinds are our own judgement (common practice, no source); the cells
//! themselves are checked against Python's csv module and pandas in tests/reference.

use std::path::PathBuf;

use serde_json::Value;
use spinney_core::data::{read_table, summarise, Kind, ReadOptions};
use spinney_core::progress::Silent;

fn fixtures() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures")
}

#[test]
fn every_fixture_reads_as_its_manifest_says() {
    let manifest: Value =
        serde_json::from_slice(&std::fs::read(fixtures().join("manifest.json")).unwrap()).unwrap();
    let entries = manifest.as_array().unwrap();
    assert!(
        entries.len() >= 25,
        "the corpus should hold at least 25 cases"
    );
    let mut failures = Vec::new();
    for e in entries {
        let file = e["file"].as_str().unwrap();
        let bytes = std::fs::read(fixtures().join(file)).unwrap();
        let strings = |key: &str| -> Vec<String> {
            e[key].as_array().map_or(Vec::new(), |a| {
                a.iter().map(|v| v.as_str().unwrap().to_string()).collect()
            })
        };
        let options = ReadOptions {
            file_name: Some(file.to_string()),
            sheet: e["sheet"].as_str().map(str::to_string),
            missing_tokens: strings("missing_tokens"),
            ..ReadOptions::default()
        };
        let label = format!(
            "{file}{}",
            e["sheet"]
                .as_str()
                .map_or(String::new(), |s| format!("#{s}"))
        );
        match (
            read_table(&bytes, &options, &mut Silent),
            e["expect"].as_str().unwrap(),
        ) {
            (Ok(loaded), "table") => {
                if loaded.table.rows as u64 != e["rows"].as_u64().unwrap() {
                    failures.push(format!(
                        "{label}: {} rows, expected {}",
                        loaded.table.rows, e["rows"]
                    ));
                }
                let summaries = summarise(&loaded.table);
                for (i, want) in e["columns"].as_array().unwrap().iter().enumerate() {
                    let Some(col) = loaded.table.columns.get(i) else {
                        failures.push(format!("{label}: column {i} missing"));
                        continue;
                    };
                    let kind = Kind::from_label(want["kind"].as_str().unwrap()).unwrap();
                    if col.name != want["name"].as_str().unwrap() || col.kind != kind {
                        failures.push(format!(
                            "{label}: column {i} is {} ({:?}), expected {want}",
                            col.name, col.kind
                        ));
                    }
                    if let Some(flags) = e["flags"].get(&col.name) {
                        let got: Vec<&str> = summaries[i].flags.iter().map(|f| f.label()).collect();
                        for f in flags.as_array().unwrap() {
                            if !got.contains(&f.as_str().unwrap()) {
                                failures.push(format!(
                                    "{label}: column {} lacks flag {f} (has {got:?})",
                                    col.name
                                ));
                            }
                        }
                    }
                }
                for needle in strings("notices_contain") {
                    if !loaded
                        .notices
                        .iter()
                        .any(|n| n.to_lowercase().contains(&needle))
                    {
                        failures.push(format!(
                            "{label}: no notice contains {needle:?}: {:?}",
                            loaded.notices
                        ));
                    }
                }
            }
            (Err(err), "error") => {
                let msg = err.to_string();
                for needle in strings("message_contains") {
                    if !msg.contains(&needle) {
                        failures.push(format!("{label}: message lacks {needle:?}: {msg}"));
                    }
                }
            }
            (Ok(_), _) => failures.push(format!("{label}: read fine, expected an error")),
            (Err(err), _) => failures.push(format!("{label}: {err}")),
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// Cutting any fixture at any of a spread of points never panics (truncated downloads).
#[test]
fn truncated_files_never_panic() {
    for entry in std::fs::read_dir(fixtures()).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|x| x == "py" || x == "json") {
            continue;
        }
        let bytes = std::fs::read(&path).unwrap();
        let step = (bytes.len() / 37).max(1);
        for cut in (0..bytes.len().min(200_000)).step_by(step) {
            let _ = read_table(&bytes[..cut], &ReadOptions::default(), &mut Silent);
        }
    }
}
