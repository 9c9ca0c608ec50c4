//! Writing the commands' summaries to standard output.
//!
//! `print!` panics when standard output is a closed pipe (`frothline unpack ... | head`);
//! a summary that nobody reads any more is not an error, so these writes ignore it.

use std::io::Write;

/// Write `text` to standard output; a closed pipe or other write error is ignored.
pub fn print(text: &str) {
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(text.as_bytes()).and_then(|_| out.flush());
}

/// [`print`] with a line end.
pub fn println(text: &str) {
    print(&format!("{text}\n"));
}
