//! The link subcommands from the outside: `ports`, `demo` (a short run) and `unpack` of the
//! archive it wrote, and their usage errors.

use std::process::Command;

fn frothline(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_frothline"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn ports_lists_without_failing() {
    let out = frothline(&["ports"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn usage_errors_exit_with_2() {
    let out = frothline(&["watch"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--port"));
    let out = frothline(&[
        "watch",
        "--port",
        "x",
        "--start-run",
        "a-label-far-too-long-for-the-wire",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("at most 16"));
    let out = frothline(&[
        "unpack",
        "/nonexistent/session.frothwire",
        "--out",
        "/tmp/x",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot read archive"));
}

#[cfg(unix)]
#[test]
fn a_short_demo_writes_an_archive_that_unpacks_to_the_same_csv() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("demo");
    let d = dir.display().to_string();
    let out = frothline(&["demo", "--plain", "--duration", "1.5", "--out", &d]);
    let text = String::from_utf8_lossy(&out.stdout);
    println!("{text}");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains("Near fast water"), "the safety line");
    assert!(text.contains("ACK start-run"));
    assert!(text.contains("lost 0, CRC failures 0"));
    assert!(text.contains(" probe A "));
    let archive = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|x| x == "frothwire"))
        .expect("an archive");
    let un = tmp.path().join("un");
    let out = frothline(&[
        "unpack",
        &archive.display().to_string(),
        "--out",
        &un.display().to_string(),
    ]);
    let report = String::from_utf8_lossy(&out.stdout);
    println!("{report}");
    assert!(out.status.success());
    assert!(report.contains("tail: clean"));
    assert!(report.contains("link gaps: none"));
    let a = std::fs::read_to_string(dir.join("windows.csv")).unwrap();
    let b = std::fs::read_to_string(un.join("windows.csv")).unwrap();
    assert!(a.lines().count() > 4);
    assert_eq!(a, b);
}
