//! Build script: the board's memory layout and linker scripts, and the raw samples of the
//! embedded capture (the data chunk of `capture/capture.wav`, or `capture-surge/` in the
//! field-logger build; 16-bit PCM, as little-endian i16 in `$OUT_DIR/capture.i16`).

use std::env;
use std::fs;
use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("OUT_DIR"));
    let board = env::var_os("CARGO_FEATURE_BOARD_STM32F4").is_some();
    let memory = if board {
        "memory-nucleo-f411re.x"
    } else {
        "memory-mps2-an386.x"
    };
    fs::copy(memory, out.join("memory.x")).expect("copy memory.x");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed={memory}");
    println!("cargo:rustc-link-arg-bins=--nmagic");
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    if env::var_os("CARGO_FEATURE_DEFMT").is_some() {
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    }

    // The field-logger build embeds the surge capture, the others the steady one.
    let dir = if env::var_os("CARGO_FEATURE_FIELD_LOGGER").is_some() {
        "capture-surge"
    } else {
        "capture"
    };
    let wav = format!("{dir}/capture.wav");
    println!("cargo:rerun-if-changed={wav}");
    println!("cargo:rerun-if-changed={dir}/config.rs");
    let samples = if env::var_os("CARGO_FEATURE_EMULATED_MPS2").is_some() {
        let bytes = fs::read(&wav).unwrap_or_else(|e| {
            panic!("{wav}: {e} (run `bash scripts/firmware-capture.sh` at the repo root)")
        });
        pcm16_data(&bytes).unwrap_or_else(|e| panic!("{wav}: {e}"))
    } else {
        Vec::new()
    };
    fs::write(out.join("capture.i16"), samples).expect("write capture.i16");
}

/// The data chunk of a RIFF/WAVE file of 16-bit PCM (little-endian i16 already).
fn pcm16_data(b: &[u8]) -> Result<Vec<u8>, String> {
    if b.len() < 12 || &b[0..4] != b"RIFF" || &b[8..12] != b"WAVE" {
        return Err("not a RIFF/WAVE file".into());
    }
    let u16_at = |i: usize| u16::from_le_bytes([b[i], b[i + 1]]);
    let u32_at = |i: usize| u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]]) as usize;
    let mut pos = 12;
    let mut pcm16 = false;
    while pos + 8 <= b.len() {
        let id = &b[pos..pos + 4];
        let len = u32_at(pos + 4);
        let body = pos + 8;
        let end = body
            .checked_add(len)
            .filter(|&e| e <= b.len())
            .ok_or("chunk past the end")?;
        match id {
            b"fmt " if len >= 16 => {
                let tag = u16_at(body);
                let bits = u16_at(body + 14);
                // 1 = PCM, 0xFFFE = extensible (PCM subformat assumed by the synthesiser).
                pcm16 = (tag == 1 || tag == 0xFFFE) && bits == 16;
            }
            b"data" => {
                if !pcm16 {
                    return Err("not 16-bit PCM (the firmware embeds i16 samples)".into());
                }
                return Ok(b[body..end].to_vec());
            }
            _ => {}
        }
        pos = end + (len & 1);
    }
    Err("no data chunk".into())
}
