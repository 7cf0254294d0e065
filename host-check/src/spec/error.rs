//! Errors in a spec file: every one names the file, the line and column, and
//! the field it is about.

use std::fmt;
use std::ops::Range;

/// A problem with a spec file, located in the source.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SpecError {
    /// The file name as given on the command line (or `<demo>`).
    pub file: String,
    /// 1-based line (0: the problem is with the file as a whole, and no
    /// position is printed).
    pub line: usize,
    /// 1-based column (0 with line 0).
    pub column: usize,
    /// The field the problem is about, as a dotted path.
    pub field: String,
    /// What is wrong.
    pub message: String,
}

impl fmt::Display for SpecError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.line == 0 {
            write!(f, "{}: ", self.file)?;
        } else {
            write!(f, "{}:{}:{}: ", self.file, self.line, self.column)?;
        }
        if self.field.is_empty() {
            f.write_str(&self.message)
        } else {
            write!(f, "field `{}`: {}", self.field, self.message)
        }
    }
}

impl std::error::Error for SpecError {}

/// Turns byte offsets into line and column for one source text.
#[derive(Debug, Clone)]
pub struct Locator<'a> {
    file: &'a str,
    text: &'a str,
}

impl<'a> Locator<'a> {
    /// A locator for `text`, read from `file`.
    pub fn new(file: &'a str, text: &'a str) -> Self {
        Self { file, text }
    }

    /// The file name.
    pub fn file(&self) -> &str {
        self.file
    }

    /// 1-based line and column of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let before = self.text.get(..offset).unwrap_or("");
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().map_or(0, |s| s.chars().count()) + 1;
        (line, col)
    }

    /// An error at a span, about a field.
    pub fn error(&self, span: Range<usize>, field: &str, message: impl Into<String>) -> SpecError {
        let (line, column) = self.line_col(span.start);
        SpecError {
            file: self.file.to_string(),
            line,
            column,
            field: field.to_string(),
            message: message.into(),
        }
    }

    /// An error about the file as a whole (no position is printed).
    pub fn whole_file(&self, field: &str, message: impl Into<String>) -> SpecError {
        SpecError {
            file: self.file.to_string(),
            line: 0,
            column: 0,
            field: field.to_string(),
            message: message.into(),
        }
    }

    /// Converts a TOML parse or type error, naming the key on the line it
    /// points at when the message itself does not. A missing field is
    /// named itself: inside its table (at the table's header) or, for a
    /// missing top-level table or key, without a position.
    pub fn from_toml(&self, err: &toml::de::Error) -> SpecError {
        let span = err.span().unwrap_or(0..0);
        let message = err.message().trim().to_string();
        if let Some(missing) = message
            .strip_prefix("missing field `")
            .and_then(|m| m.split_once('`'))
            .map(|(name, _)| name.to_string())
        {
            let offset = span.start.min(self.text.len());
            let line_start = self.text[..offset].rfind('\n').map_or(0, |i| i + 1);
            let line = self.text[line_start..].lines().next().unwrap_or("");
            let in_table = line.trim_start().starts_with('[');
            if in_table {
                let table = self.key_near(offset);
                return self.error(span, &format!("{table}.{missing}"), message);
            }
            return self.whole_file(&missing, message);
        }
        let field = self.key_near(span.start);
        self.error(span, &field, message)
    }

    /// The dotted key path at a byte offset: the table header above it plus
    /// the key on its own line.
    fn key_near(&self, offset: usize) -> String {
        let offset = offset.min(self.text.len());
        let start_of_line = self.text[..offset].rfind('\n').map_or(0, |i| i + 1);
        let end_of_line = self.text[offset..]
            .find('\n')
            .map_or(self.text.len(), |i| offset + i);
        let line = &self.text[start_of_line..end_of_line];
        let header = self.text[..start_of_line]
            .lines()
            .rev()
            .map(str::trim)
            .find(|l| l.starts_with('['))
            .map(|l| l.trim_matches(|c| c == '[' || c == ']').trim().to_string());
        let trimmed = line.trim();
        if trimmed.starts_with('[') {
            return trimmed
                .trim_matches(|c| c == '[' || c == ']')
                .trim()
                .to_string();
        }
        let key = line
            .split_once('=')
            .map(|(k, _)| k.trim().trim_matches('"').to_string())
            .filter(|k| !k.is_empty() && !k.contains('{') && !k.contains('['));
        match (header, key) {
            (Some(h), Some(k)) => format!("{h}.{k}"),
            (None, Some(k)) => k,
            (Some(h), None) => h,
            (None, None) => "(document)".to_string(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_and_columns_are_one_based() {
        let text = "a = 1\n[model]\nkind = 2\n";
        let loc = Locator::new("x.toml", text);
        assert_eq!(loc.line_col(0), (1, 1));
        assert_eq!(loc.line_col(text.find("kind").unwrap()), (3, 1));
        assert_eq!(loc.key_near(text.find('2').unwrap()), "model.kind");
    }

    #[test]
    fn a_whole_file_error_prints_no_position() {
        let loc = Locator::new("x.toml", "");
        let e = loc.whole_file("model", "missing field `model`");
        assert_eq!(
            e.to_string(),
            "x.toml: field `model`: missing field `model`"
        );
    }
}
