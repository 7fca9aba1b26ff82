//! HTML escaping for every user-supplied string.

use std::fmt::Write;

/// Escapes text for use in element content and in double- or single-quoted attributes.
pub(crate) fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    esc_into(&mut out, s);
    out
}

/// Appends `s`, escaped, to `out`.
pub(crate) fn esc_into(out: &mut String, s: &str) {
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            // Control characters other than tab/newline are not valid in HTML text.
            c if c.is_control() && c != '\n' && c != '\t' => {
                let _ = write!(out, "&#xFFFD;");
            }
            c => out.push(c),
        }
    }
}

/// A URL-safe anchor id for the pair at a display position, whatever characters its names hold.
pub(crate) fn pair_anchor(position: usize) -> String {
    format!("pair-{position}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_markup_and_quotes() {
        // The five characters HTML treats specially (WHATWG HTML standard, "escapingString").
        assert_eq!(
            esc(r#"<a href="x">&'</a>"#),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;&lt;/a&gt;"
        );
        assert_eq!(esc("plain µ-text"), "plain µ-text");
        assert_eq!(esc("a\u{0}b"), "a&#xFFFD;b");
    }
}
