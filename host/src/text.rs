//! Text from a module, made safe to print.
//!
//! Why this exists: a module is written by someone else, and every string it
//! hands the host (its error messages, its manifest's description, authors,
//! institution, licence, law source, parameter descriptions and units,
//! reference-point labels) would otherwise reach the user's terminal or a
//! text product byte for byte. Escape sequences in such a string could clear
//! the screen, retitle the window or overwrite earlier lines, and Unicode
//! bidirectional controls could reorder what the user reads. [`printable`]
//! turns every such character into a visible `\u{..}` escape and leaves all
//! other text, non-ASCII letters included, as it is. The result is always a
//! single line. [`printable_lines`] does the same but keeps line breaks, for
//! messages of several lines, and [`json_printable`] does it for JSON text
//! while keeping it valid JSON with the same meaning.

use std::borrow::Cow;

/// `s` with every character that could change how a terminal or text viewer
/// shows the surrounding text replaced by a visible escape `\u{HEX}`
/// (lower-case hex, no leading zeros): all C0 controls (ESC, BEL, `\r`,
/// `\n` and `\t` included), DEL, the C1 controls U+0080..U+009F, the line
/// and paragraph separators, and the invisible formatting characters listed
/// in [`is_format_control`]. Borrows `s` when nothing needs escaping.
pub fn printable(s: &str) -> Cow<'_, str> {
    if !s.chars().any(needs_escape) {
        return Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 16);
    for c in s.chars() {
        if needs_escape(c) {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// Like [`printable`], but line feeds are kept, so that a message of several
/// lines still prints as several lines; every other character that
/// [`printable`] escapes is escaped.
pub fn printable_lines(s: &str) -> Cow<'_, str> {
    if !s.split('\n').any(|line| line.chars().any(needs_escape)) {
        return Cow::Borrowed(s);
    }
    let lines: Vec<Cow<'_, str>> = s.split('\n').map(printable).collect();
    Cow::Owned(lines.join("\n"))
}

/// JSON text (as written by `serde_json`) with every character that
/// [`printable`] would escape and that JSON leaves raw (DEL, C1 controls,
/// line and paragraph separators, invisible format characters) written as a
/// JSON `\uXXXX` escape instead, as a surrogate pair above U+FFFF. Such
/// characters can only occur inside JSON strings, where the escape decodes
/// to the same character, so the document means exactly what it did. ASCII
/// controls are left alone: `serde_json` already escapes them inside
/// strings, and outside strings they are the layout of pretty-printed JSON.
pub fn json_printable(json: &str) -> Cow<'_, str> {
    let bad = |c: char| needs_escape(c) && (c == '\u{7f}' || !c.is_ascii());
    if !json.chars().any(bad) {
        return Cow::Borrowed(json);
    }
    let mut out = String::with_capacity(json.len() + 16);
    for c in json.chars() {
        if bad(c) {
            let mut units = [0u16; 2];
            for u in c.encode_utf16(&mut units) {
                out.push_str(&format!("\\u{:04x}", u));
            }
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// Whether `c` is escaped by [`printable`].
pub fn needs_escape(c: char) -> bool {
    // `char::is_control` is exactly Unicode category Cc: C0, DEL and C1.
    c.is_control() || matches!(c, '\u{2028}' | '\u{2029}') || is_format_control(c)
}

/// Whether `c` is an invisible formatting character (Unicode category Cf)
/// that can hide or reorder text: the bidirectional embeddings, overrides
/// and isolates (U+202A..U+202E, U+2066..U+2069) and marks (U+200E, U+200F,
/// U+061C), zero-width space, word joiner and invisible operators, the byte
/// order mark, soft hyphen, interlinear annotation and tag characters, and
/// the other Cf characters of Unicode 15. Zero-width non-joiner and joiner
/// (U+200C, U+200D) are left alone: several scripts and emoji sequences need
/// them to spell words correctly, and they cannot reorder text.
pub fn is_format_control(c: char) -> bool {
    matches!(
        c as u32,
        0x00AD
            | 0x0600..=0x0605
            | 0x061C
            | 0x06DD
            | 0x070F
            | 0x0890..=0x0891
            | 0x08E2
            | 0x180E
            | 0x200B
            | 0x200E..=0x200F
            | 0x202A..=0x202E
            | 0x2060..=0x2064
            | 0x2066..=0x206F
            | 0xFEFF
            | 0xFFF9..=0xFFFB
            | 0x110BD
            | 0x110CD
            | 0x13430..=0x1343F
            | 0x1BCA0..=0x1BCA3
            | 0x1D173..=0x1D17A
            | 0xE0001
            | 0xE0020..=0xE007F
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_text_including_non_ascii_letters_is_borrowed_unchanged() {
        for s in [
            "",
            "Sodium sputtering",
            "Å µm 90° Ω·cm",
            "Jöns Jacob Berzelius",
            "日本語",
            "a\u{200d}b",
        ] {
            let p = printable(s);
            assert!(matches!(p, Cow::Borrowed(_)), "{s:?} was copied");
            assert_eq!(p, s);
        }
    }

    #[test]
    fn terminal_escape_sequences_become_visible() {
        assert_eq!(printable("\u{1b}[2J"), "\\u{1b}[2J");
        assert_eq!(printable("\u{1b}]0;title\u{7}"), "\\u{1b}]0;title\\u{7}");
        assert_eq!(printable("ok\rFAKE"), "ok\\u{d}FAKE");
        assert_eq!(printable("a\nb\tc"), "a\\u{a}b\\u{9}c");
        assert_eq!(printable("\0"), "\\u{0}");
        assert_eq!(printable("x\u{7f}"), "x\\u{7f}");
        // C1: U+009B is a one-character CSI on some terminals.
        assert_eq!(printable("\u{9b}2J \u{80}"), "\\u{9b}2J \\u{80}");
    }

    #[test]
    fn bidi_and_invisible_format_characters_become_visible() {
        assert_eq!(printable("abc\u{202e}fed"), "abc\\u{202e}fed");
        for c in [
            '\u{200e}',
            '\u{200f}',
            '\u{202a}',
            '\u{202b}',
            '\u{202c}',
            '\u{202d}',
            '\u{202e}',
            '\u{2066}',
            '\u{2067}',
            '\u{2068}',
            '\u{2069}',
            '\u{61c}',
            '\u{200b}',
            '\u{2060}',
            '\u{feff}',
            '\u{ad}',
            '\u{e0041}',
            '\u{2028}',
            '\u{2029}',
        ] {
            let s = format!("a{c}b");
            let p = printable(&s);
            assert_eq!(p, format!("a\\u{{{:x}}}b", c as u32), "{c:?}");
        }
    }

    #[test]
    fn escaped_text_contains_no_character_that_needs_escaping() {
        let nasty: String = (0u32..0x300)
            .chain(0x2000..0x2070)
            .chain(0xE0000..0xE0080)
            .filter_map(char::from_u32)
            .collect();
        let p = printable(&nasty);
        assert!(!p.chars().any(needs_escape));
        assert!(!p.contains('\u{1b}') && !p.contains('\n') && !p.contains('\r'));
        // Printable characters survive in order.
        assert!(p.contains("ABCDEFG") && p.contains("àáâ"));
    }

    #[test]
    fn printable_lines_keeps_line_feeds_only() {
        assert!(matches!(printable_lines("a\nb"), Cow::Borrowed(_)));
        assert_eq!(
            printable_lines("one\ntwo\u{1b}[2J\r\n\u{202e}"),
            "one\ntwo\\u{1b}[2J\\u{d}\n\\u{202e}"
        );
    }

    #[test]
    fn json_printable_escapes_hidden_characters_and_keeps_the_meaning() {
        let v = serde_json::json!({
            "description": "ok \u{1b}[2J \u{202e}evil \u{7f} \u{9b} \u{e0041} Å µ °",
            "n": [1, 2],
        });
        let raw = serde_json::to_string_pretty(&v).unwrap();
        let safe = json_printable(&raw);
        assert!(!safe.chars().any(|c| needs_escape(c) && c != '\n'), "{safe}");
        assert!(safe.contains("\\u202e") && safe.contains("\\udb40\\udc41"), "{safe}");
        assert!(safe.contains("Å µ °"));
        let back: serde_json::Value = serde_json::from_str(&safe).unwrap();
        assert_eq!(back, v);
        let plain = serde_json::to_string_pretty(&serde_json::json!({"a": "Å"})).unwrap();
        assert!(matches!(json_printable(&plain), Cow::Borrowed(_)));
    }
}
