//! Writing the commands' summaries to standard output.
//!
//! `print!` panics when standard output is a closed pipe (`frothline unpack ... | head`);
//! a summary that nobody reads any more is not an error, so these writes ignore it.
//!
//! On a terminal, a line wider than the terminal is folded at spaces, its continuation
//! indented under its start, instead of being cut mid-word by the terminal; into a pipe or
//! a file the text goes as it is, one record per line.

use std::io::{IsTerminal, Write};

/// The width of the terminal standard output writes to, in columns; `None` when it is not
/// a terminal (a pipe, a file) or its size cannot be read.
pub fn terminal_width() -> Option<usize> {
    if !std::io::stdout().is_terminal() {
        return None;
    }
    ratatui::crossterm::terminal::size()
        .ok()
        .map(|(cols, _)| cols as usize)
        .filter(|&c| c > 0)
}

/// Write `text` to standard output, folded to the terminal's width when it goes to one; a
/// closed pipe or other write error is ignored.
pub fn print(text: &str) {
    let text = match terminal_width() {
        Some(width) => fold_lines(text, width),
        None => text.to_string(),
    };
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(text.as_bytes()).and_then(|_| out.flush());
}

/// [`print`] with a line end.
pub fn println(text: &str) {
    print(&format!("{text}\n"));
}

/// `text` with every line wider than `width` columns folded at spaces (never inside a
/// word, so a path stays one piece to copy); the continuation lines are indented four
/// columns past the line's own indent. Lines that fit, and the line ends, are kept as
/// they are.
pub fn fold_lines(text: &str, width: usize) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 16);
    for piece in text.split_inclusive('\n') {
        let (line, end) = match piece.strip_suffix('\n') {
            Some(l) => (l, "\n"),
            None => (piece, ""),
        };
        if textwrap::core::display_width(line) <= width {
            out.push_str(line);
        } else {
            let indent = line.len() - line.trim_start_matches(' ').len();
            let hang = " ".repeat((indent + 4).min(width / 2));
            let opts = textwrap::Options::new(width.max(8))
                .initial_indent(&line[..indent])
                .subsequent_indent(&hang)
                // Paths and commands stay whole (a reader copies them): no break at a
                // hyphen or inside a word, even when a word is wider than the line.
                .word_splitter(textwrap::WordSplitter::NoHyphenation)
                .break_words(false);
            out.push_str(&textwrap::fill(line.trim_start_matches(' '), opts));
        }
        out.push_str(end);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::fold_lines;

    #[test]
    fn long_lines_fold_at_spaces_under_their_indent() {
        let text = "short\n  a line of several words that is longer than twenty\nend";
        let folded = fold_lines(text, 20);
        for line in folded.lines() {
            assert!(line.chars().count() <= 20, "{line:?}");
        }
        assert_eq!(
            folded,
            "short\n  a line of several\n      words that is\n      longer than\n      twenty\nend"
        );
        // The words come back in order, none split.
        let words: Vec<&str> = folded.split_whitespace().collect();
        let want: Vec<&str> = text.split_whitespace().collect();
        assert_eq!(words, want);
    }

    #[test]
    fn paths_are_not_broken_at_hyphens() {
        let text = "  written to target/demo/session-20261204T200241Z.frothwire today";
        let folded = fold_lines(text, 30);
        assert!(folded
            .lines()
            .any(|l| l.trim() == "target/demo/session-20261204T200241Z.frothwire"));
    }

    #[test]
    fn lines_that_fit_are_kept_byte_for_byte() {
        let text = "a  b   c\n\n  ± 95 %\n";
        assert_eq!(fold_lines(text, 80), text);
    }
}
