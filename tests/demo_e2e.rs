//! The small demo end to end through the binary: `cairn demo DIR --small` writes the
//! invented study, runs every stage and renders the reports. The Markdown report must
//! match the saved expected file (tests/fixtures/demo_small/report.md), shown as a
//! line diff when it does not; set CAIRN_BLESS=1 to rewrite the expected file after an
//! intended change, and review the diff before committing it.

use std::path::Path;
use std::process::Command;

fn diff(expected: &str, found: &str) -> String {
    let e: Vec<&str> = expected.lines().collect();
    let f: Vec<&str> = found.lines().collect();
    let mut out = String::new();
    let mut shown = 0;
    for i in 0..e.len().max(f.len()) {
        let (a, b) = (e.get(i), f.get(i));
        if a != b {
            out.push_str(&format!(
                "line {}:\n  expected: {}\n  found:    {}\n",
                i + 1,
                a.unwrap_or(&"<none>"),
                b.unwrap_or(&"<none>")
            ));
            shown += 1;
            if shown == 12 {
                out.push_str("  (more differences not shown)\n");
                break;
            }
        }
    }
    out
}

#[test]
fn the_small_demo_runs_end_to_end_and_its_report_matches_the_expected_file() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path().join("demo");
    let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(["demo", dir.to_str().unwrap(), "--small"])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    // Planted faults are excluded, so the run finishes with exit code 1.
    assert_eq!(
        out.status.code(),
        Some(1),
        "stdout:\n{stdout}\nstderr:\n{stderr}"
    );
    let rep = dir.join("cairn-out/report");
    for f in ["report.html", "report.md", "brief.md", "brief.html"] {
        assert!(rep.join(f).is_file(), "{f} missing");
    }
    let md = std::fs::read_to_string(rep.join("report.md")).unwrap();
    // Sections the demo must produce (it has covariates, several animals and a truth file).
    for h in [
        "## What drives the states",
        "## Recovery of the simulated truth",
        "## Hotspots",
    ] {
        assert!(md.contains(h), "{h} missing");
    }
    assert!(
        !md.contains("Sections not produced"),
        "every section should be produced"
    );
    let expected_path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/demo_small/report.md");
    if std::env::var_os("CAIRN_BLESS").is_some() {
        std::fs::write(&expected_path, &md).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&expected_path).unwrap_or_default();
    assert!(
        expected == md,
        "report.md differs from {}:\n{}",
        expected_path.display(),
        diff(&expected, &md)
    );
}
