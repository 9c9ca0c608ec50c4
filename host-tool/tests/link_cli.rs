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
    assert!(text.contains(" probe bed "));
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
    assert!(report.contains("damage: none"));
    assert!(report.contains("runs started: 1"), "the demo's StartRun");
    // Host times in ISO 8601: "host time 2026-12-02T07:00:00.000Z to ...".
    let iso = regex_like_iso(&report);
    assert!(iso, "{report}");
    let a = std::fs::read_to_string(dir.join("windows.csv")).unwrap();
    let b = std::fs::read_to_string(un.join("windows.csv")).unwrap();
    assert!(a.lines().count() > 4);
    assert_eq!(a, b);

    // Damage in the middle: the header of a chunk a third of the way in and a payload byte
    // two thirds in. unpack resynchronises at the next chunk, reports both stretches, and
    // still decodes the rest.
    let mut bytes = std::fs::read(&archive).unwrap();
    let syncs: Vec<usize> = bytes
        .windows(2)
        .enumerate()
        .filter(|(_, w)| *w == [0xC5, 0x57])
        .map(|(i, _)| i)
        .collect();
    let (one, two) = (syncs[syncs.len() / 3], syncs[2 * syncs.len() / 3]);
    bytes[one + 3] = 0xFF; // port 255: no such port
    bytes[two + 8] ^= 0x40;
    let damaged = tmp.path().join("damaged.frothwire");
    std::fs::write(&damaged, &bytes).unwrap();
    let un2 = tmp.path().join("un2");
    let out = frothline(&[
        "unpack",
        &damaged.display().to_string(),
        "--out",
        &un2.display().to_string(),
    ]);
    let report = String::from_utf8_lossy(&out.stdout);
    println!("{report}");
    assert!(out.status.success());
    assert!(report.contains("damage: 2 DAMAGED stretch(es)"), "{report}");
    assert!(report.contains(&format!("at offset {one}")), "{report}");
    let c = std::fs::read_to_string(un2.join("windows.csv")).unwrap();
    assert!(
        c.lines().count() > a.lines().count() / 2,
        "most rows survive"
    );
    // One summary line per port that exists, not one per port number 0..=255.
    assert_eq!(report.matches("\nport ").count(), 1, "{report}");
}

/// True if `text` holds a time of the form 2026-12-02T07:00:00.000Z.
fn regex_like_iso(text: &str) -> bool {
    text.split_whitespace().any(|w| {
        let b = w.as_bytes();
        b.len() >= 24
            && b[4] == b'-'
            && b[7] == b'-'
            && b[10] == b'T'
            && b[13] == b':'
            && b[16] == b':'
            && b[19] == b'.'
            && b[23] == b'Z'
            && b[..4].iter().all(u8::is_ascii_digit)
    })
}

/// A WAV capture, random bytes and an empty file are no archives: unpack fails with a
/// message naming the file and writes no windows.csv.
#[test]
fn unpack_refuses_files_that_are_no_archive() {
    let tmp = tempfile::tempdir().unwrap();
    let wav =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../fixtures/steady-b2/capture.wav");
    let noise = tmp.path().join("noise.bin");
    std::fs::write(
        &noise,
        (0..4000u32)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
            .collect::<Vec<u8>>(),
    )
    .unwrap();
    let empty = tmp.path().join("empty.frothwire");
    std::fs::write(&empty, b"").unwrap();
    for (file, says) in [
        (&wav, "RIFF/WAV"),
        (&noise, "instead of"),
        (&empty, "empty"),
    ] {
        let out_dir = tmp.path().join("out");
        let out = frothline(&[
            "unpack",
            &file.display().to_string(),
            "--out",
            &out_dir.display().to_string(),
        ]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(
            err.contains(&file.display().to_string()) && err.contains(says),
            "{err}"
        );
        assert!(!out_dir.join("windows.csv").exists());
    }
}
