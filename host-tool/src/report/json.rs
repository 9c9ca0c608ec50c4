//! A small reader for `flow.json`: one JSON object (RFC 8259) of scalars, nested objects
//! flattened to `outer.inner` keys.
//!
//! Hand-written rather than serde_json because linking serde_json into this crate makes
//! `i16: PartialEq<_>` ambiguous in other modules' tests (serde_json implements
//! `PartialEq<Value>` for the integer types). The file is small and flat, so a reader of the
//! full grammar that keeps only what the page shows is short: numbers become numbers;
//! strings, booleans and arrays become text (an array as its JSON source); `null` is
//! skipped.

use super::indicators::Value;

/// An error: (1-based line, message).
pub type JsonError = (u64, String);

struct Reader<'a> {
    src: &'a str,
    pos: usize,
}

impl Reader<'_> {
    fn line(&self) -> u64 {
        1 + self.src[..self.pos].matches('\n').count() as u64
    }

    fn err<T>(&self, what: &str) -> Result<T, JsonError> {
        Err((self.line(), what.to_string()))
    }

    fn peek(&self) -> Option<char> {
        self.src[self.pos..].chars().next()
    }

    fn bump(&mut self) -> Option<char> {
        let c = self.peek()?;
        self.pos += c.len_utf8();
        Some(c)
    }

    fn ws(&mut self) {
        while matches!(self.peek(), Some(' ' | '\t' | '\n' | '\r')) {
            self.pos += 1;
        }
    }

    fn expect(&mut self, c: char) -> Result<(), JsonError> {
        self.ws();
        if self.bump() == Some(c) {
            Ok(())
        } else {
            self.err(&format!("expected `{c}`"))
        }
    }

    fn string(&mut self) -> Result<String, JsonError> {
        self.expect('"')?;
        let mut out = String::new();
        loop {
            match self.bump() {
                None => return self.err("unterminated string"),
                Some('"') => return Ok(out),
                Some('\\') => match self.bump() {
                    Some('"') => out.push('"'),
                    Some('\\') => out.push('\\'),
                    Some('/') => out.push('/'),
                    Some('b') => out.push('\u{8}'),
                    Some('f') => out.push('\u{c}'),
                    Some('n') => out.push('\n'),
                    Some('r') => out.push('\r'),
                    Some('t') => out.push('\t'),
                    Some('u') => {
                        let hi = self.hex4()?;
                        let code = if (0xD800..0xDC00).contains(&hi) {
                            if !self.src[self.pos..].starts_with("\\u") {
                                return self.err("lone surrogate in \\u escape");
                            }
                            self.pos += 2;
                            let lo = self.hex4()?;
                            if !(0xDC00..0xE000).contains(&lo) {
                                return self.err("bad surrogate pair in \\u escape");
                            }
                            0x10000 + ((hi - 0xD800) << 10) + (lo - 0xDC00)
                        } else {
                            hi
                        };
                        match char::from_u32(code) {
                            Some(c) => out.push(c),
                            None => return self.err("bad \\u escape"),
                        }
                    }
                    _ => return self.err("bad escape in string"),
                },
                Some(c) if (c as u32) < 0x20 => return self.err("control character in string"),
                Some(c) => out.push(c),
            }
        }
    }

    fn hex4(&mut self) -> Result<u32, JsonError> {
        let digits = self.src.get(self.pos..self.pos + 4).unwrap_or("");
        match u32::from_str_radix(digits, 16) {
            Ok(v) if digits.len() == 4 && digits.chars().all(|c| c.is_ascii_hexdigit()) => {
                self.pos += 4;
                Ok(v)
            }
            _ => self.err("bad \\u escape"),
        }
    }

    fn number(&mut self) -> Result<f64, JsonError> {
        let start = self.pos;
        while matches!(self.peek(), Some('0'..='9' | '-' | '+' | '.' | 'e' | 'E')) {
            self.pos += 1;
        }
        let text = &self.src[start..self.pos];
        let valid = {
            let t = text.strip_prefix('-').unwrap_or(text);
            let (mant, exp) = match t.find(['e', 'E']) {
                Some(i) => (&t[..i], Some(&t[i + 1..])),
                None => (t, None),
            };
            let (int, frac) = match mant.split_once('.') {
                Some((i, f)) => (i, Some(f)),
                None => (mant, None),
            };
            let digits = |s: &str| !s.is_empty() && s.chars().all(|c| c.is_ascii_digit());
            digits(int)
                && (int == "0" || !int.starts_with('0'))
                && frac.is_none_or(digits)
                && exp.is_none_or(|e| digits(e.strip_prefix(['+', '-']).unwrap_or(e)))
        };
        match text.parse::<f64>() {
            Ok(v) if valid => Ok(v),
            _ => {
                self.pos = start;
                self.err(&format!("`{text}` is not a JSON number"))
            }
        }
    }

    fn literal(&mut self, word: &str) -> Result<(), JsonError> {
        if self.src[self.pos..].starts_with(word) {
            self.pos += word.len();
            Ok(())
        } else {
            self.err("expected a value")
        }
    }

    /// A value; objects are flattened into `out` under `key`.
    fn value(&mut self, key: &str, out: &mut Vec<(String, Value)>) -> Result<(), JsonError> {
        self.ws();
        match self.peek() {
            Some('{') => self.object(key, out),
            Some('[') => {
                let start = self.pos;
                self.array()?;
                out.push((
                    key.to_string(),
                    Value::Text(self.src[start..self.pos].into()),
                ));
                Ok(())
            }
            Some('"') => {
                let s = self.string()?;
                out.push((key.to_string(), Value::Text(s)));
                Ok(())
            }
            Some('t') => {
                self.literal("true")?;
                out.push((key.to_string(), Value::Text("true".into())));
                Ok(())
            }
            Some('f') => {
                self.literal("false")?;
                out.push((key.to_string(), Value::Text("false".into())));
                Ok(())
            }
            Some('n') => self.literal("null"),
            Some(_) => {
                let v = self.number()?;
                out.push((key.to_string(), Value::Number(v)));
                Ok(())
            }
            None => self.err("unexpected end of file"),
        }
    }

    fn array(&mut self) -> Result<(), JsonError> {
        self.expect('[')?;
        self.ws();
        if self.peek() == Some(']') {
            self.pos += 1;
            return Ok(());
        }
        let mut sink = Vec::new();
        loop {
            self.value("", &mut sink)?;
            self.ws();
            match self.bump() {
                Some(',') => continue,
                Some(']') => return Ok(()),
                _ => return self.err("expected `,` or `]` in array"),
            }
        }
    }

    fn object(&mut self, prefix: &str, out: &mut Vec<(String, Value)>) -> Result<(), JsonError> {
        self.expect('{')?;
        self.ws();
        if self.peek() == Some('}') {
            self.pos += 1;
            return Ok(());
        }
        loop {
            self.ws();
            let k = self.string()?;
            self.expect(':')?;
            let key = if prefix.is_empty() {
                k
            } else {
                format!("{prefix}.{k}")
            };
            self.value(&key, out)?;
            self.ws();
            match self.bump() {
                Some(',') => continue,
                Some('}') => return Ok(()),
                _ => return self.err("expected `,` or `}` in object"),
            }
        }
    }
}

/// Read a document that is one JSON object into flattened `(key, value)` pairs, in file order.
pub fn flat_object(text: &str) -> Result<Vec<(String, Value)>, JsonError> {
    let text = text.trim_start_matches('\u{feff}');
    let mut r = Reader { src: text, pos: 0 };
    r.ws();
    if r.peek() != Some('{') {
        return r.err("expected one JSON object of indicators");
    }
    let mut out = Vec::new();
    r.object("", &mut out)?;
    r.ws();
    if r.pos != text.len() {
        return r.err("text after the object");
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn num(v: f64) -> Value {
        Value::Number(v)
    }
    fn txt(s: &str) -> Value {
        Value::Text(s.into())
    }

    #[test]
    fn reads_scalars_nested_objects_and_arrays() {
        let doc = r#"{ "a": 1.5e3, "b": "x\"y\u00e9\ud83d\ude00", "c": {"d": -0.25, "e": null},
                       "f": [1, {"g": 2}], "h": true, "i": 0 }"#;
        let got = flat_object(doc).unwrap();
        assert_eq!(
            got,
            vec![
                ("a".into(), num(1500.0)),
                ("b".into(), txt("x\"yé😀")),
                ("c.d".into(), num(-0.25)),
                ("f".into(), txt("[1, {\"g\": 2}]")),
                ("h".into(), txt("true")),
                ("i".into(), num(0.0)),
            ]
        );
        assert_eq!(flat_object("{}").unwrap(), vec![]);
    }

    #[test]
    fn errors_name_the_line() {
        for (doc, line) in [
            ("{\n\"a\": 1,\n\"b\": 01\n}", 3),
            ("{\"a\": 1,}", 1),
            ("[1]", 1),
            ("{\"a\": 1} x", 1),
            ("{\n\"a\": \"open", 2),
            ("{\"a\": .5}", 1),
            ("{\"a\": tru}", 1),
        ] {
            let e = flat_object(doc).unwrap_err();
            assert_eq!(e.0, line, "{doc}: {e:?}");
        }
    }
}
