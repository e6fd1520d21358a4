//! Writing the report folder: atomic replacement, refusal of foreign folders, `force`.

mod report_support;

use kickscan::report::{write_report, ReportError, ReportInput};

#[test]
fn report_folder_is_written_replaced_and_guarded() {
    let f = report_support::fixture();
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path().join("out");
    let mut input = ReportInput::new(&f.doc, &f.settings, &f.sketches);
    input.fit = Some(&f.fit);
    input.variants = &f.variants;

    write_report(&dir, &input).expect("first write");
    for name in [
        "report.html",
        "events.csv",
        "summary.json",
        ".kickscan-report",
    ] {
        assert!(dir.join(name).is_file(), "{name}");
    }
    assert!(dir.join("plots/overview-1.png").is_file());
    assert!(dir.join("plots/stress-histogram.svg").is_file());
    if let Ok(keep) = std::env::var("KICKSCAN_KEEP_REPORT") {
        // For looking at the plots by eye.
        let keep = std::path::Path::new(&keep);
        let mut forced = ReportInput::new(&f.doc, &f.settings, &f.sketches);
        forced.fit = Some(&f.fit);
        forced.variants = &f.variants;
        forced.verdicts = &f.verdicts;
        forced.force = true;
        write_report(keep, &forced).expect("kept copy");
    }

    // A second run replaces our own folder, dropping files the new report does not have.
    std::fs::write(dir.join("stale.txt"), "old").unwrap();
    write_report(&dir, &input).expect("rewrite over our own report");
    assert!(!dir.join("stale.txt").exists());
    assert!(dir.join("report.html").is_file());

    // A folder someone else filled is refused and left untouched.
    let foreign = tmp.path().join("notes");
    std::fs::create_dir(&foreign).unwrap();
    std::fs::write(foreign.join("thesis.tex"), "precious").unwrap();
    let err = write_report(&foreign, &input).expect_err("refused");
    assert!(matches!(err, ReportError::Refused(_)));
    let msg = err.to_string();
    assert!(
        msg.contains("notes") && msg.contains("not written by kickscan"),
        "{msg}"
    );
    assert_eq!(
        std::fs::read_to_string(foreign.join("thesis.tex")).unwrap(),
        "precious"
    );

    // A plain file in the way is refused too.
    let file = tmp.path().join("plain");
    std::fs::write(&file, "x").unwrap();
    assert!(matches!(
        write_report(&file, &input),
        Err(ReportError::Refused(_))
    ));

    // With force the foreign folder is replaced.
    input.force = true;
    write_report(&foreign, &input).expect("forced");
    assert!(!foreign.join("thesis.tex").exists());
    assert!(foreign.join("report.html").is_file());

    // No temporary or old folders are left beside the reports.
    let leftovers: Vec<_> = std::fs::read_dir(tmp.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("kickscan-"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

#[test]
fn an_empty_existing_folder_is_used() {
    let f = report_support::fixture();
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path().join("fresh");
    std::fs::create_dir(&dir).unwrap();
    write_report(&dir, &ReportInput::new(&f.doc, &f.settings, &f.sketches)).expect("written");
    assert!(dir.join("report.html").is_file());
}
