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
