//! The few non-ASCII characters the shell draws, and their ASCII stand-ins.
//!
//! The shell speaks UTF-8 when the locale says so: the first of `LC_ALL`, `LC_CTYPE` and
//! `LANG` that is set and not empty must name UTF-8 (`C.UTF-8`, `en_GB.utf8`). Otherwise
//! (no locale at all, `C`, `POSIX`, `en_US.ISO-8859-1`) every rule, marker and arrow is
//! ASCII. Values from the database are printed as they are in either case. The shell never
//! colours its output, so `NO_COLOR` has nothing to turn off.

use std::sync::OnceLock;

/// The characters of one look.
pub struct Glyphs {
    /// Starts a section title (`▸ queries.sql · statement 3`).
    pub title: &'static str,
    /// Separates the parts of a title or a caption.
    pub dot: &'static str,
    /// The rail down the left of a table (and of a statement excerpt).
    pub rail: char,
    /// Where the header rule leaves the rail.
    pub rule_start: char,
    /// The header rule.
    pub rule: char,
    /// Ends a table: the row-count line hangs from it.
    pub foot: &'static str,
    /// From a file to a table.
    pub arrow: &'static str,
    /// An example's result.
    pub gives: &'static str,
    /// Lines left out.
    pub ellipsis: &'static str,
    /// The prompt's marker, and the continuation's.
    pub prompt: &'static str,
    pub more: &'static str,
    /// A progress bar's filled and empty cells.
    pub bar_done: char,
    pub bar_todo: char,
}

const UNICODE: Glyphs = Glyphs {
    title: "▸",
    dot: "·",
    rail: '│',
    rule_start: '├',
    rule: '╌',
    foot: "╰",
    arrow: "→",
    gives: "⇒",
    ellipsis: "…",
    prompt: "▸",
    more: "│",
    bar_done: '▰',
    bar_todo: '▱',
};

const ASCII: Glyphs = Glyphs {
    title: ">",
    dot: "-",
    rail: '|',
    rule_start: '+',
    rule: '-',
    foot: "+",
    arrow: "->",
    gives: "=>",
    ellipsis: "...",
    prompt: ">",
    more: "|",
    bar_done: '#',
    bar_todo: '.',
};

/// Whether a locale setting names UTF-8.
pub fn names_utf8(value: &str) -> bool {
    let v = value.to_ascii_lowercase();
    v.contains("utf-8") || v.contains("utf8")
}

/// Whether the environment's locale is UTF-8, by the POSIX order of precedence.
pub fn locale_is_utf8() -> bool {
    for var in ["LC_ALL", "LC_CTYPE", "LANG"] {
        if let Some(v) = std::env::var_os(var) {
            let v = v.to_string_lossy();
            if !v.is_empty() {
                return names_utf8(&v);
            }
        }
    }
    false
}

/// The look for this process (decided once).
pub fn get() -> &'static Glyphs {
    static CHOICE: OnceLock<bool> = OnceLock::new();
    if *CHOICE.get_or_init(locale_is_utf8) {
        &UNICODE
    } else {
        &ASCII
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utf8_names() {
        for v in ["C.UTF-8", "en_GB.utf8", "de_DE.UTF8"] {
            assert!(names_utf8(v), "{v}");
        }
        for v in ["C", "POSIX", "en_US.ISO-8859-1", ""] {
            assert!(!names_utf8(v), "{v}");
        }
    }

    #[test]
    fn the_ascii_look_is_ascii() {
        let g = &ASCII;
        let all = format!(
            "{}{}{}{}{}{}{}{}{}{}{}{}{}",
            g.title,
            g.dot,
            g.rail,
            g.rule_start,
            g.rule,
            g.foot,
            g.arrow,
            g.gives,
            g.ellipsis,
            g.prompt,
            g.more,
            g.bar_done,
            g.bar_todo
        );
        assert!(all.is_ascii(), "{all}");
    }
}
