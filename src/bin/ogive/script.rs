//! Splits a `.sql` file into statements, keeping where each starts and the comment lines
//! written directly above it.
//!
//! The scanner knows SQLite's lexical rules that matter for finding statement ends: string
//! literals (`'...'` with `''` inside), quoted identifiers (`"..."`, `` `...` ``, `[...]`),
//! line comments (`--`) and block comments (`/* */`). A `;` inside a `CREATE TRIGGER` body
//! does not end the statement: as in SQLite's own completeness test, the trigger ends at a
//! `;` that follows `END` which itself follows a `;`.

/// One statement of a file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Statement {
    /// The statement's text, from its first token through its closing `;` (if any).
    pub text: String,
    /// Byte offset of `text` in the file.
    pub offset: usize,
    /// 1-based line of the first token.
    pub line: usize,
    /// 1-based column (in characters) of the first token.
    pub col: usize,
    /// 1-based position among the file's statements.
    pub index: usize,
    /// Whether a `;` closes it (only the last statement of a file may lack one).
    pub closed: bool,
    /// The `--` comment lines directly above the statement (no blank line between), without
    /// the dashes, in file order.
    pub comments: Vec<String>,
}

impl Statement {
    /// The first comment line above the statement, which names a check or titles a plot.
    pub fn name(&self) -> Option<&str> {
        self.comments
            .iter()
            .map(|c| c.as_str())
            .find(|c| !c.is_empty() && directive(c).is_none())
    }

    /// The value of a `-- key: value` comment line above the statement.
    pub fn directive(&self, key: &str) -> Option<&str> {
        self.comments
            .iter()
            .filter_map(|c| directive(c))
            .find(|(k, _)| k.eq_ignore_ascii_case(key))
            .map(|(_, v)| v)
    }
}

/// The words the shell reads from `-- key: value` comment lines.
const DIRECTIVES: &[&str] = &["kind"];

fn directive(comment: &str) -> Option<(&str, &str)> {
    let (k, v) = comment.split_once(':')?;
    let k = k.trim();
    DIRECTIVES
        .iter()
        .any(|d| d.eq_ignore_ascii_case(k))
        .then(|| (k, v.trim()))
}

/// 1-based line and column (in characters) of a byte offset in `src`.
pub fn line_col(src: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(src.len());
    let before = &src[..offset];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    (line, before[line_start..].chars().count() + 1)
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Tok {
    Semi,
    End,
    Other,
}

/// Splits `src` into its statements. Text after the last `;` that holds a token becomes a
/// final statement (SQLite then judges it); comments and blanks alone do not.
pub fn split(src: &str) -> Vec<Statement> {
    let b = src.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    // Per statement: where it starts, its leading words, trigger mode, the last two tokens.
    let mut start: Option<usize> = None;
    let mut words: Vec<String> = Vec::new();
    let mut trigger = false;
    let mut last = [Tok::Other, Tok::Other];
    // Own-line comments seen since the last statement: (line, text).
    let mut comments: Vec<(usize, String)> = Vec::new();
    let mut line = 1;
    let mut line_start = 0;

    let finish = |out: &mut Vec<Statement>,
                  s: usize,
                  end: usize,
                  closed: bool,
                  comments: &mut Vec<(usize, String)>| {
        let (l, c) = line_col(src, s);
        // The comment block that ends on the line just above the statement.
        let mut block: Vec<String> = Vec::new();
        let mut want = l.saturating_sub(1);
        for (cl, text) in comments.iter().rev() {
            if *cl == want && want > 0 {
                block.push(text.clone());
                want -= 1;
            } else if *cl < want {
                break;
            }
        }
        block.reverse();
        comments.clear();
        out.push(Statement {
            text: src[s..end].trim_end().to_string(),
            offset: s,
            line: l,
            col: c,
            index: out.len() + 1,
            closed,
            comments: block,
        });
    };

    while i < b.len() {
        let ch = b[i];
        match ch {
            b'\n' => {
                line += 1;
                line_start = i + 1;
                i += 1;
            }
            b' ' | b'\t' | b'\r' | b'\x0c' => i += 1,
            b'-' if b.get(i + 1) == Some(&b'-') => {
                let end = src[i..].find('\n').map_or(b.len(), |n| i + n);
                let alone = src[line_start..i].trim().is_empty();
                if start.is_none() && alone {
                    let text = src[i + 2..end].trim().to_string();
                    comments.push((line, text));
                }
                i = end;
            }
            b'/' if b.get(i + 1) == Some(&b'*') => {
                let end = src[i + 2..].find("*/").map_or(b.len(), |n| i + 2 + n + 2);
                for (k, &c) in b[i..end].iter().enumerate() {
                    if c == b'\n' {
                        line += 1;
                        line_start = i + k + 1;
                    }
                }
                i = end;
            }
            b';' => {
                if let Some(s) = start {
                    let ends = !trigger || last == [Tok::Semi, Tok::End];
                    last = [last[1], Tok::Semi];
                    if ends {
                        finish(&mut out, s, i + 1, true, &mut comments);
                        start = None;
                        words.clear();
                        trigger = false;
                        last = [Tok::Other, Tok::Other];
                    }
                }
                i += 1;
            }
            _ => {
                if start.is_none() {
                    start = Some(i);
                }
                let tok_start = i;
                i = match ch {
                    b'\'' | b'"' | b'`' => quoted(b, i, ch),
                    b'[' => src[i..].find(']').map_or(b.len(), |n| i + n + 1),
                    c if is_word(c) => {
                        let mut j = i;
                        while j < b.len() && is_word(b[j]) {
                            j += 1;
                        }
                        j
                    }
                    _ => i + src[i..].chars().next().map_or(1, char::len_utf8),
                };
                for (k, &c) in b[tok_start..i].iter().enumerate() {
                    if c == b'\n' {
                        line += 1;
                        line_start = tok_start + k + 1;
                    }
                }
                let word = &src[tok_start..i];
                let tok = if word.eq_ignore_ascii_case("end") {
                    Tok::End
                } else {
                    Tok::Other
                };
                last = [last[1], tok];
                if words.len() < 4 && is_word(b[tok_start]) {
                    words.push(word.to_ascii_lowercase());
                    trigger = trigger || starts_trigger(&words);
                }
            }
        }
    }
    if let Some(s) = start {
        finish(&mut out, s, b.len(), false, &mut comments);
    }
    out
}

fn is_word(c: u8) -> bool {
    c.is_ascii_alphanumeric() || c == b'_' || c == b'$' || c >= 0x80
}

/// End of a quoted token starting at `i` (a doubled quote stays inside).
fn quoted(b: &[u8], i: usize, q: u8) -> usize {
    let mut j = i + 1;
    while j < b.len() {
        if b[j] == q {
            if b.get(j + 1) == Some(&q) {
                j += 2;
                continue;
            }
            return j + 1;
        }
        j += 1;
    }
    b.len()
}

fn starts_trigger(words: &[String]) -> bool {
    let w: Vec<&str> = words.iter().map(String::as_str).collect();
    let w = if w.first() == Some(&"explain") {
        &w[1..]
    } else {
        &w[..]
    };
    matches!(
        w,
        ["create", "trigger", ..] | ["create", "temp" | "temporary", "trigger", ..]
    )
}

/// Byte offsets of the calls `name(` in `src`, outside strings, quoted names and comments.
pub fn calls(src: &str, name: &str) -> Vec<usize> {
    let b = src.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        match b[i] {
            b'-' if b.get(i + 1) == Some(&b'-') => {
                i = src[i..].find('\n').map_or(b.len(), |n| i + n);
            }
            b'/' if b.get(i + 1) == Some(&b'*') => {
                i = src[i + 2..].find("*/").map_or(b.len(), |n| i + 2 + n + 2);
            }
            q @ (b'\'' | b'"' | b'`') => i = quoted(b, i, q),
            b'[' => i = src[i..].find(']').map_or(b.len(), |n| i + n + 1),
            c if is_word(c) => {
                let start = i;
                while i < b.len() && is_word(b[i]) {
                    i += 1;
                }
                if src[start..i].eq_ignore_ascii_case(name)
                    && src[i..].trim_start().starts_with('(')
                {
                    out.push(start);
                }
            }
            _ => i += 1,
        }
    }
    out
}

/// Where a statement's runtime error happened, when SQLite does not say: an error that
/// starts with the name of one of ogive's functions (`quantile: p must be ...`) points at
/// the first call of that function in the statement.
pub fn failing_call(sql: &str, message: &str) -> Option<usize> {
    let (name, _) = message.split_once(':')?;
    let name = name.trim();
    ogive::catalogue::find(name)?;
    calls(sql, name).first().copied()
}

/// Whether `src` ends at a statement boundary: every statement in it is closed by its `;`
/// (the interactive prompt keeps reading lines until this holds).
pub fn is_complete(src: &str) -> bool {
    split(src).last().is_none_or(|s| s.closed)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(src: &str) -> Vec<String> {
        split(src).into_iter().map(|s| s.text).collect()
    }

    #[test]
    fn splits_on_semicolons_outside_quotes_and_comments() {
        let src = "SELECT 'a;b', \"c;d\", [e;f], `g;h`; -- x; y\nSELECT 2 /* ; */;\n";
        assert_eq!(
            texts(src),
            vec!["SELECT 'a;b', \"c;d\", [e;f], `g;h`;", "SELECT 2 /* ; */;"]
        );
    }

    #[test]
    fn doubled_quotes_stay_inside_strings() {
        assert_eq!(
            texts("SELECT 'it''s;'; SELECT 1"),
            vec!["SELECT 'it''s;';", "SELECT 1"]
        );
    }

    #[test]
    fn trigger_bodies_keep_their_semicolons() {
        let src = "CREATE TEMP TRIGGER t AFTER INSERT ON a BEGIN\n  INSERT INTO b VALUES (CASE WHEN 1 THEN 2 END);\n  DELETE FROM c;\nEND;\nSELECT 1;";
        let s = texts(src);
        assert_eq!(s.len(), 2);
        assert!(s[0].ends_with("END;"));
        assert_eq!(s[1], "SELECT 1;");
    }

    #[test]
    fn positions_and_comment_names() {
        let src = "-- file header\n\n-- first check\n-- more words\n  SELECT 1 AS ok;\nSELECT 2; -- trailing\nSELECT 3;";
        let s = split(src);
        assert_eq!((s[0].line, s[0].col, s[0].index), (5, 3, 1));
        assert_eq!(s[0].name(), Some("first check"));
        assert_eq!(s[0].comments, vec!["first check", "more words"]);
        assert_eq!(s[1].name(), None);
        assert_eq!(s[2].name(), None, "a trailing comment names nothing");
        assert_eq!((s[2].line, s[2].col), (7, 1));
    }

    #[test]
    fn directives_are_not_names() {
        let s = split("-- kind: steps\n-- Temperature cdf\nSELECT 1, 2;");
        assert_eq!(s[0].directive("kind"), Some("steps"));
        assert_eq!(s[0].name(), Some("Temperature cdf"));
    }

    #[test]
    fn comments_alone_make_no_statement() {
        assert!(split("-- nothing\n/* here */\n").is_empty());
    }

    #[test]
    fn line_col_counts_characters() {
        let src = "ab\n°c d";
        assert_eq!(line_col(src, src.find('d').unwrap()), (2, 4));
    }

    #[test]
    fn completeness_for_the_prompt() {
        assert!(is_complete("SELECT 1;"));
        assert!(is_complete("SELECT 1; -- done"));
        assert!(!is_complete("SELECT 1"));
        assert!(!is_complete("SELECT ';"));
        assert!(!is_complete("SELECT 1 /* ;"));
        assert!(!is_complete(
            "CREATE TRIGGER t AFTER INSERT ON a BEGIN SELECT 1;"
        ));
        assert!(is_complete(
            "CREATE TRIGGER t AFTER INSERT ON a BEGIN SELECT 1; END;"
        ));
        assert!(is_complete(""));
    }

    #[test]
    fn calls_skip_strings_and_comments() {
        let src = "SELECT 'quantile(' , -- quantile(\n \"quantile\"(x), Quantile (x, 2)";
        assert_eq!(calls(src, "quantile"), vec![src.find("Quantile").unwrap()]);
        assert_eq!(
            failing_call(src, "quantile: p must be between 0 and 1, got 2"),
            Some(src.find("Quantile").unwrap())
        );
        assert_eq!(failing_call(src, "no such table: t"), None);
    }
}
