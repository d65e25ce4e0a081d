//! Source files and byte spans.

/// Index of a loaded file in a [`Sources`] set.
pub type FileId = usize;

/// A byte range in one source file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Span {
    /// The file.
    pub file: FileId,
    /// Byte offset of the first character.
    pub start: usize,
    /// Byte offset one past the last character.
    pub end: usize,
}

impl Span {
    /// A span from `start` to `end` in `file`.
    pub fn new(file: FileId, start: usize, end: usize) -> Self {
        Span { file, start, end }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span {
            file: self.file,
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}

/// The files of one load: names and texts, indexed by [`FileId`].
#[derive(Clone, Debug, Default)]
pub struct Sources {
    names: Vec<String>,
    texts: Vec<String>,
}

impl Sources {
    /// An empty set.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds a file and returns its id.
    pub fn add(&mut self, name: impl Into<String>, text: impl Into<String>) -> FileId {
        self.names.push(name.into());
        self.texts.push(text.into());
        self.names.len() - 1
    }

    /// The name a file was added under.
    pub fn name(&self, file: FileId) -> &str {
        &self.names[file]
    }

    /// The text of a file.
    pub fn text(&self, file: FileId) -> &str {
        &self.texts[file]
    }

    /// Number of files.
    pub fn len(&self) -> usize {
        self.names.len()
    }

    /// Whether no file was added.
    pub fn is_empty(&self) -> bool {
        self.names.is_empty()
    }

    /// 1-based line and column (in characters) of a byte offset.
    pub fn line_column(&self, file: FileId, offset: usize) -> (usize, usize) {
        let text = &self.texts[file];
        let offset = offset.min(text.len());
        let before = &text[..floor_char_boundary(text, offset)];
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
        (line, col)
    }
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}
