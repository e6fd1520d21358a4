//! The same inputs give byte-identical outputs whatever the thread count and whenever they
//! run: no timestamps, no thread-order effects in the JSON document or the report folder.

use std::collections::BTreeMap;
use std::path::Path;

use assert_cmd::Command;

/// Every file under `dir`, by relative path, with its bytes.
fn files_under(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let rel = p.strip_prefix(dir).unwrap().display().to_string();
                out.insert(rel, std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

fn run(threads: &str, out: &Path) -> Vec<u8> {
    let captures = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
    let o = Command::cargo_bin("kickscan")
        .unwrap()
        .env("RAYON_NUM_THREADS", threads)
        .arg("measure")
        .arg(&captures)
        .arg("--json")
        .arg("--out")
        .arg(out)
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    o.stdout
}

#[test]
fn one_thread_and_two_give_the_same_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("one"), dir.path().join("two"));
    let json_1 = run("1", &a);
    let json_2 = run("2", &b);
    assert!(!json_1.is_empty());
    assert!(
        json_1 == json_2,
        "measure --json differs between 1 and 2 threads"
    );
    let (fa, fb) = (files_under(&a), files_under(&b));
    for name in ["report.html", "events.csv", "summary.json"] {
        assert!(
            fa.contains_key(name),
            "{name} missing from the report folder"
        );
    }
    assert_eq!(
        fa.keys().collect::<Vec<_>>(),
        fb.keys().collect::<Vec<_>>(),
        "same files in both report folders"
    );
    for (name, bytes) in &fa {
        assert!(bytes == &fb[name], "{name} differs between 1 and 2 threads");
    }
}
