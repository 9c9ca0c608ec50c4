//! The real binary: bad input ends with a message and exit code 2, never a panic.

use std::process::Command;

fn frothline() -> Command {
    Command::new(env!("CARGO_BIN_EXE_frothline"))
}

#[test]
fn bad_layout_exits_2_with_a_message() {
    let dir = tempfile::tempdir().unwrap();
    let layout = dir.path().join("layout.toml");
    std::fs::write(
        &layout,
        "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"A\"\n",
    )
    .unwrap();
    let wav = dir.path().join("c.wav");
    std::fs::write(&wav, b"RIFF").unwrap();
    let out = frothline()
        .args([
            "replay",
            wav.to_str().unwrap(),
            "--layout",
            layout.to_str().unwrap(),
            "--out",
        ])
        .arg(dir.path().join("out"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert!(err.starts_with("error: "), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn help_names_every_subcommand() {
    let out = frothline().arg("--help").output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    for sub in ["replay", "synth"] {
        assert!(text.contains(sub), "--help lacks {sub}: {text}");
    }
}

/// `--duration` values beyond what a `Duration` holds, vanishing or negative are usage
/// errors quoting the value as typed; none panics (1e20 s used to, in
/// `Duration::from_secs_f64`).
#[test]
fn session_durations_out_of_range_exit_2_quoting_the_value() {
    for cmd in ["demo", "simulate", "watch"] {
        for v in ["1e20", "1e-300", "-1"] {
            let out = frothline().args([cmd, "--duration", v]).output().unwrap();
            let err = String::from_utf8_lossy(&out.stderr);
            assert_eq!(out.status.code(), Some(2), "{cmd} {v}: {err}");
            assert!(!err.contains("panicked"), "{cmd} {v}: {err}");
            assert!(err.contains(&format!("`{v}`")), "{cmd} {v}: {err}");
            assert!(!err.contains("-- -1"), "{cmd} {v}: {err}");
            assert!(err.len() < 400, "{cmd} {v}: {err}");
        }
    }
}

/// `--out` naming a file says so, instead of "File exists (os error 17)".
#[test]
fn out_naming_a_file_is_refused_in_plain_words() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("results");
    std::fs::write(&file, "x").unwrap();
    let fixture = concat!(env!("CARGO_MANIFEST_DIR"), "/../fixtures/steady-b2");
    let out = frothline()
        .args(["replay", &format!("{fixture}/capture.wav"), "--layout"])
        .arg(format!("{fixture}/layout.toml"))
        .arg("--out")
        .arg(&file)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("not a folder"), "{err}");
    assert_eq!(std::fs::read_to_string(&file).unwrap(), "x");
}

/// `synth --probes 17` would write a capture `replay` refuses: it is refused first.
#[test]
fn synth_refuses_more_probes_than_replay_runs() {
    let dir = tempfile::tempdir().unwrap();
    let out = frothline()
        .args(["synth", "--probes", "17", "--duration", "0.1", "--out"])
        .arg(dir.path().join("s"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("--probes") && err.contains("16"), "{err}");
    assert!(!dir.path().join("s/capture.wav").exists());
}
