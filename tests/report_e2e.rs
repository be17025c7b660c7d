//! End to end through the binary: `cairn run` on the bundled mini study renders a
//! self-contained, well-formed HTML report with every section, no external references
//! and escaped user strings; reruns reuse stages and give byte-identical reports; bad
//! templates and unknown state labels stop with exit code 2 and a message naming the file.

use std::path::Path;
use std::process::Command;

fn cairn(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .output()
        .expect("run cairn");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

const EVIL: &str = "<script>alert(1)</script>";

/// The mini study in a temp folder, with a hostile study name and state label.
fn mini(dir: &Path, extra: &str) -> std::path::PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/mini");
    std::fs::copy(src.join("fixes.csv"), dir.join("fixes.csv")).unwrap();
    let study = std::fs::read_to_string(src.join("study.toml"))
        .unwrap()
        .replace(
            "name = \"Brinevik Sound mini example\"",
            &format!("name = \"Brinevik {EVIL} & co\""),
        )
        .replace(
            "states = [\"slow\", \"fast\"]",
            &format!("states = [\"{EVIL}\", \"fast\"]"),
        );
    let p = dir.join("study.toml");
    std::fs::write(&p, format!("{study}\n{extra}")).unwrap();
    p
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

fn manifest_without_timings(p: &Path) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_str(&read(p)).unwrap();
    v.as_object_mut().unwrap().remove("timings");
    v.as_object_mut().unwrap().remove("stages");
    v
}

#[test]
fn run_renders_a_self_contained_escaped_report_and_reruns_identically() {
    let d = tempfile::tempdir().unwrap();
    let study = mini(d.path(), "[report]\nmin_animals = 1\n");
    let s = study.to_str().unwrap();
    let (code, out, err) = cairn(&["run", s]);
    // The mini data hold planted faults, so the run finishes with exclusions: exit 1.
    assert_eq!(code, 1, "stdout:\n{out}\nstderr:\n{err}");
    assert!(out.contains("prepare") && out.contains("report"), "{out}");
    let rep = d.path().join("cairn-out/report");
    let html = read(&rep.join("report.html"));

    // Well-formed (the templates are XHTML-compatible) and self-contained.
    let doc = roxmltree::Document::parse_with_options(
        &html,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .expect("report.html parses as XML");
    for id in [
        "summary",
        "data",
        "models",
        "chosen",
        "drivers",
        "budgets",
        "hotspots",
        "animals",
        "diagnostics",
        "methods",
        "references",
        "cautions",
        "reproducibility",
    ] {
        assert!(
            doc.descendants()
                .any(|n| n.tag_name().name() == "section" && n.attribute("id") == Some(id)),
            "section {id} missing"
        );
    }
    for n in doc.descendants().filter(|n| n.is_element()) {
        for a in n.attributes() {
            if matches!(a.name(), "src" | "href") {
                assert!(
                    a.value().starts_with('#'),
                    "external reference {}={} in <{}>",
                    a.name(),
                    a.value(),
                    n.tag_name().name()
                );
            }
        }
        assert_ne!(
            n.tag_name().name(),
            "script",
            "a script element in the report"
        );
    }
    assert!(
        !html.contains(EVIL),
        "an unescaped user string in report.html"
    );
    assert!(
        html.contains("&lt;script&gt;"),
        "the escaped label is missing"
    );
    let svgs = doc
        .descendants()
        .filter(|n| n.tag_name().name() == "svg")
        .count();
    assert!(svgs >= 5, "expected inline figures, found {svgs}");
    let brief = read(&rep.join("brief.html"));
    assert!(!brief.contains(EVIL));
    roxmltree::Document::parse_with_options(
        &brief,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .expect("brief.html parses as XML");

    // Markdown: every section, figures beside it, escaped user strings.
    let md = read(&rep.join("report.md"));
    for h in [
        "## Data and cleaning",
        "## Model comparison",
        "## The chosen model",
        "## What drives the states",
        "## Activity budgets",
        "## Hotspots",
        "## Animals",
        "## Diagnostics",
        "## Methods",
        "## References",
        "## Cautions",
        "## Reproducibility",
    ] {
        assert!(md.contains(h), "{h} missing from report.md");
    }
    assert!(!md.contains(EVIL));
    for line in md.lines().filter(|l| l.starts_with("![")) {
        let file = line.rsplit_once("](").unwrap().1.trim_end_matches(')');
        assert!(
            rep.join(file).is_file(),
            "{file} referenced but not written"
        );
    }
    let brief_md = read(&rep.join("brief.md"));
    assert!(brief_md.contains("## Cautions") && brief_md.contains("generalised"));
    assert!(rep.join("tables/hotspots.geojson").is_file());
    assert!(rep.join("tables/budget_hourly.csv").is_file());

    // Rerun: stages reused, reports byte-identical, manifest equal but for timings.
    let m1 = manifest_without_timings(&d.path().join("cairn-out/manifest.json"));
    let (code2, out2, _) = cairn(&["run", s]);
    assert_eq!(code2, 1);
    assert!(out2.contains("reused"), "{out2}");
    assert_eq!(md, read(&rep.join("report.md")));
    assert_eq!(html, read(&rep.join("report.html")));
    assert_eq!(
        m1,
        manifest_without_timings(&d.path().join("cairn-out/manifest.json"))
    );

    // Forced rerun of every stage: the same bytes again.
    let (code3, out3, _) = cairn(&["run", "--force", s]);
    assert_eq!(code3, 1);
    assert!(!out3.contains("reused"), "{out3}");
    assert_eq!(md, read(&rep.join("report.md")));
    assert_eq!(brief_md, read(&rep.join("brief.md")));
    assert_eq!(
        m1,
        manifest_without_timings(&d.path().join("cairn-out/manifest.json"))
    );
}

#[test]
fn a_broken_user_template_names_its_file_and_line_and_keeps_the_old_report() {
    let d = tempfile::tempdir().unwrap();
    let tpl = d.path().join("tpl");
    std::fs::create_dir(&tpl).unwrap();
    std::fs::write(
        tpl.join("brief.md"),
        "# {{ study.name }}\n\n{{ 1 + }}\nline four\n",
    )
    .unwrap();
    let study = mini(d.path(), "[report]\ntemplates = \"tpl\"\n");
    let (code, _, err) = cairn(&["run", study.to_str().unwrap()]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("brief.md"), "{err}");
    assert!(err.contains("tpl"), "the user's file is named: {err}");
    assert!(err.contains("line 3"), "the line is named: {err}");
    assert!(
        !d.path().join("cairn-out/report").exists(),
        "no half-written report"
    );
}

#[test]
fn an_unknown_hotspot_state_stops_at_validation() {
    let d = tempfile::tempdir().unwrap();
    let study = mini(d.path(), "[report]\nhotspot_state = \"foraging\"\n");
    let (code, _, err) = cairn(&["check", study.to_str().unwrap()]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("report.hotspot_state") && err.contains("foraging"),
        "{err}"
    );
}

#[test]
fn a_study_with_one_animal_produces_what_it_can_and_says_what_it_could_not() {
    let d = tempfile::tempdir().unwrap();
    let study = mini(d.path(), "");
    let all = read(&d.path().join("fixes.csv"));
    let mut lines = all.lines();
    let mut one = format!("{}\n", lines.next().unwrap());
    for l in lines.filter(|l| l.starts_with("brine-01,")) {
        one.push_str(l);
        one.push('\n');
    }
    std::fs::write(d.path().join("fixes.csv"), one).unwrap();
    let (code, out, err) = cairn(&["run", study.to_str().unwrap()]);
    assert_eq!(code, 1, "stdout:\n{out}\nstderr:\n{err}");
    let md = read(&d.path().join("cairn-out/report/report.md"));
    for h in [
        "## Model comparison",
        "## Activity budgets",
        "## Animals",
        "## Diagnostics",
    ] {
        assert!(md.contains(h), "{h} missing");
    }
    // One animal can never make a shareable hotspot cell (minimum 3 animals): the report
    // says so instead of drawing an empty map.
    assert!(md.contains("no cell was used by 3 or more animals"), "{md}");
    assert!(md.contains("| animals | 1 |"), "one animal counted");
}
