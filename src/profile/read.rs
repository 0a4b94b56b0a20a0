//! Reading the TOML tree with its spans: the one place key paths are
//! written, values are typed, bounds are checked and refusals are located.
//!
//! The file is parsed by `toml` into a tree that keeps the span of every
//! key and value ([`toml::de::DeTable`]); the sections then read their keys
//! from it through `Table`. Every message is ours (what was expected, what
//! was found), located at the span the parser gave, so no text is scanned
//! and no library message is interpreted.

use super::{Location, Locations, ProfileError};
use std::cell::RefCell;
use std::fmt;
use std::ops::Range;
use toml::Spanned;
use toml::de::{DeTable, DeValue};

/// A dotted key path such as `cage.node[5].id` (list items count from 1).
/// Every key path in a message is built here.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Default)]
pub struct KeyPath(String);

impl KeyPath {
    /// The top of the file.
    pub fn root() -> KeyPath {
        KeyPath(String::new())
    }
    /// A top-level section such as `vehicle`.
    pub fn section(name: &str) -> KeyPath {
        KeyPath::root().key(name)
    }
    /// A key inside this table.
    pub fn key(&self, name: &str) -> KeyPath {
        // Joined by hand rather than by `format!`: a large cage's file has
        // tens of thousands of keys, and the formatting machinery was an
        // eighth of reading it.
        if self.0.is_empty() {
            KeyPath(name.to_string())
        } else {
            let mut path = String::with_capacity(self.0.len() + 1 + name.len());
            path.push_str(&self.0);
            path.push('.');
            path.push_str(name);
            KeyPath(path)
        }
    }
    /// Item `index` (0-based) of this list, written 1-based.
    pub fn index(&self, index: usize) -> KeyPath {
        let mut digits = itoa::Buffer::new();
        let number = digits.format(index + 1);
        let mut path = String::with_capacity(self.0.len() + number.len() + 2);
        path.push_str(&self.0);
        path.push('[');
        path.push_str(number);
        path.push(']');
        KeyPath(path)
    }
    /// The path as written in messages.
    pub fn as_str(&self) -> &str {
        &self.0
    }
    /// The enclosing table or list, if any.
    pub fn parent(&self) -> Option<KeyPath> {
        let cut = self.0.rfind(['.', '['])?;
        Some(KeyPath(self.0[..cut].to_string()))
    }
}

impl fmt::Display for KeyPath {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(if self.0.is_empty() { "-" } else { &self.0 })
    }
}

/// The allowed range of a number, and how a refusal describes it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Bound {
    lo: f64,
    /// Whether `lo` itself is refused (a positive number).
    lo_open: bool,
    hi: f64,
    unit: &'static str,
}

impl Bound {
    /// Greater than zero and at most `hi` (a physical magnitude).
    pub(crate) const fn positive(hi: f64, unit: &'static str) -> Bound {
        Bound {
            lo: 0.0,
            lo_open: true,
            hi,
            unit,
        }
    }
    /// Zero or more, at most `hi`.
    pub(crate) const fn non_negative(hi: f64, unit: &'static str) -> Bound {
        Bound {
            lo: 0.0,
            lo_open: false,
            hi,
            unit,
        }
    }
    /// From `lo` to `hi`, both allowed.
    pub(crate) const fn within(lo: f64, hi: f64, unit: &'static str) -> Bound {
        Bound {
            lo,
            lo_open: false,
            hi,
            unit,
        }
    }
    /// Above `lo` and at most `hi`.
    pub(crate) const fn above(lo: f64, hi: f64, unit: &'static str) -> Bound {
        Bound {
            lo,
            lo_open: true,
            hi,
            unit,
        }
    }

    fn admits(&self, x: f64) -> bool {
        x.is_finite()
            && (if self.lo_open {
                x > self.lo
            } else {
                x >= self.lo
            })
            && x <= self.hi
    }

    /// What was expected, phrased for the side the value fell off.
    fn expected(&self, x: f64) -> String {
        let unit = if self.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        let too_big = x.is_finite() && x > self.hi;
        match (self.lo == 0.0, self.lo_open) {
            (true, true) if !too_big => "a positive number".to_string(),
            (true, false) if !too_big => "a number >= 0".to_string(),
            (true, true) => format!(
                "a positive number no larger than {}{unit} (a plausible physical value)",
                num(self.hi)
            ),
            (true, false) => format!(
                "a number from 0 to {}{unit} (a plausible physical value)",
                num(self.hi)
            ),
            (false, true) => format!(
                "a number above {} and at most {}{unit}",
                num(self.lo),
                num(self.hi)
            ),
            (false, false) => format!("a number from {} to {}{unit}", num(self.lo), num(self.hi)),
        }
    }
}

/// A number as messages write it.
pub(crate) fn num(x: f64) -> String {
    if x.is_finite() && x != 0.0 && !(1e-4..1e9).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// The parsed file, the name it is reported under, and the locations of
/// every key read so far.
pub(crate) struct Doc<'a> {
    text: &'a str,
    file: &'a str,
    seen: RefCell<Locations>,
    /// Byte offset where each line starts, so locating a key is a binary
    /// search rather than a scan of the text before it (a large cage has
    /// tens of thousands of keys).
    line_starts: Vec<usize>,
}

impl<'a> Doc<'a> {
    pub(crate) fn new(text: &'a str, file: &'a str) -> Doc<'a> {
        Doc {
            text,
            file,
            seen: RefCell::new(Locations::default()),
            line_starts: std::iter::once(0)
                .chain(
                    text.bytes()
                        .enumerate()
                        .filter(|&(_, b)| b == b'\n')
                        .map(|(i, _)| i + 1),
                )
                .collect(),
        }
    }

    pub(crate) fn file(&self) -> &str {
        self.file
    }

    /// Everything read, for checks made after the profile is typed.
    pub(crate) fn into_locations(self) -> Locations {
        self.seen.into_inner()
    }

    pub(crate) fn location(&self, span: &Range<usize>) -> Location {
        // The same answer as `line_col`, found by binary search.
        let offset = span.start.min(self.text.len());
        let line = self.line_starts.partition_point(|&s| s <= offset);
        let line_start = self.line_starts[line.saturating_sub(1)];
        let column = self
            .text
            .get(line_start..offset)
            .map_or(offset - line_start, |s| s.chars().count())
            + 1;
        Location { line, column }
    }

    /// A located refusal at a key already read (its recorded location).
    pub(crate) fn invalid_key(
        &self,
        key: &KeyPath,
        expected: impl Into<String>,
        found: impl Into<String>,
    ) -> ProfileError {
        let at = self.seen.borrow().of(key);
        ProfileError::Invalid {
            file: self.file.to_string(),
            line: at.line,
            column: at.column,
            key: key.to_string(),
            expected: expected.into(),
            found: found.into(),
        }
    }

    fn record(&self, path: &KeyPath, span: &Range<usize>) {
        let at = self.location(span);
        self.seen.borrow_mut().insert(path.clone(), at);
    }

    /// A located refusal in our words.
    pub(crate) fn invalid(
        &self,
        span: &Range<usize>,
        key: &KeyPath,
        expected: impl Into<String>,
        found: impl Into<String>,
    ) -> ProfileError {
        let at = self.location(span);
        ProfileError::Invalid {
            file: self.file.to_string(),
            line: at.line,
            column: at.column,
            key: key.to_string(),
            expected: expected.into(),
            found: found.into(),
        }
    }

    /// The top-level table of the file; `keys` are the sections it may hold.
    pub(crate) fn root<'d>(
        &'d self,
        top: &'d Spanned<DeTable<'d>>,
        keys: &'static [&'static str],
    ) -> Result<Table<'d>, ProfileError> {
        Table::new(self, KeyPath::root(), Some(top.get_ref()), 0..0, keys)
    }
}

/// A table of the file (or a section the file leaves out, which reads as
/// empty so every key takes its default). The keys it may hold are given
/// when it is opened; any other key is refused at that key.
pub(crate) struct Table<'d> {
    doc: &'d Doc<'d>,
    path: KeyPath,
    map: Option<&'d DeTable<'d>>,
    span: Range<usize>,
    keys: &'static [&'static str],
}

/// The form of a value that may be a word or a list.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Form {
    /// A text in quotes.
    Text,
    /// A list.
    List,
    /// Anything else.
    Other,
}

type Item<'d> = &'d Spanned<DeValue<'d>>;

impl<'d> Table<'d> {
    fn new(
        doc: &'d Doc<'d>,
        path: KeyPath,
        map: Option<&'d DeTable<'d>>,
        span: Range<usize>,
        keys: &'static [&'static str],
    ) -> Result<Table<'d>, ProfileError> {
        if let Some(m) = map {
            for (k, _) in m.iter() {
                let name: &str = k.get_ref();
                if !keys.contains(&name) {
                    return Err(doc.invalid(
                        &k.span(),
                        &path.key(name),
                        format!("one of the keys {}", keys.join(", ")),
                        format!("an unknown key `{name}`"),
                    ));
                }
            }
        }
        if map.is_some() && !path.as_str().is_empty() {
            doc.record(&path, &span);
        }
        Ok(Table {
            doc,
            path,
            map,
            span,
            keys,
        })
    }

    /// The path of a key of this table.
    pub(crate) fn path(&self, key: &str) -> KeyPath {
        self.path.key(key)
    }

    /// Where the table starts (its header), for refusals about the whole table.
    pub(crate) fn span(&self) -> Range<usize> {
        self.span.clone()
    }

    /// The document, for refusals that name a key of this table.
    pub(crate) fn doc(&self) -> &'d Doc<'d> {
        self.doc
    }

    fn get(&self, key: &str) -> Option<Item<'d>> {
        debug_assert!(
            self.keys.contains(&key),
            "{key} is not declared for {}",
            self.path
        );
        let item = self
            .map?
            .iter()
            .find(|(k, _)| {
                let name: &str = k.get_ref();
                name == key
            })
            .map(|(_, v)| v)?;
        self.doc.record(&self.path(key), &item.span());
        Some(item)
    }

    fn wrong(&self, key: &KeyPath, item: Item<'d>, expected: &str) -> ProfileError {
        self.doc
            .invalid(&item.span(), key, expected, describe(item.get_ref()))
    }

    /// A required key the table does not have.
    pub(crate) fn missing(&self, key: &str, expected: &str) -> ProfileError {
        let what = if self.map.is_some() {
            format!("no `{key}` in [{}]", self.path)
        } else {
            format!("no [{}] table", self.path)
        };
        self.doc
            .invalid(&self.span, &self.path(key), expected, what)
    }

    /// A number within `bound`, if the key is there.
    pub(crate) fn number(&self, key: &str, bound: Bound) -> Result<Option<f64>, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(None);
        };
        let path = self.path(key);
        let x = as_number(item.get_ref()).ok_or_else(|| self.wrong(&path, item, "a number"))?;
        check_bound(self.doc, &path, &item.span(), x, bound).map(Some)
    }

    /// A number within `bound`, or `default` when the key is left out.
    pub(crate) fn number_or(
        &self,
        key: &str,
        bound: Bound,
        default: f64,
    ) -> Result<f64, ProfileError> {
        Ok(self.number(key, bound)?.unwrap_or(default))
    }

    /// A number within `bound` that must be given.
    pub(crate) fn number_req(&self, key: &str, bound: Bound) -> Result<f64, ProfileError> {
        self.number(key, bound)?
            .ok_or_else(|| self.missing(key, "a number"))
    }

    /// A whole number from `lo` to `hi`, or `default`.
    pub(crate) fn count_or(
        &self,
        key: &str,
        lo: u32,
        hi: u32,
        default: u32,
    ) -> Result<u32, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(default);
        };
        let path = self.path(key);
        let expected = format!("a count of at least {lo} and at most {hi}");
        let n = match item.get_ref() {
            DeValue::Integer(i) => i64::from_str_radix(i.as_str(), i.radix()).ok(),
            _ => None,
        };
        match n {
            Some(n) if n >= i64::from(lo) && n <= i64::from(hi) => Ok(n as u32),
            _ => Err(self.wrong(&path, item, &expected)),
        }
    }

    /// A true/false switch, or `default`.
    pub(crate) fn flag_or(&self, key: &str, default: bool) -> Result<bool, ProfileError> {
        match self.get(key) {
            None => Ok(default),
            Some(item) => match item.get_ref() {
                DeValue::Boolean(b) => Ok(*b),
                _ => Err(self.wrong(&self.path(key), item, "true or false")),
            },
        }
    }

    /// A text, if the key is there, with its span.
    pub(crate) fn text(&self, key: &str) -> Result<Option<Spanned<String>>, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(None);
        };
        match item.get_ref() {
            DeValue::String(s) => Ok(Some(Spanned::new(item.span(), s.to_string()))),
            _ => Err(self.wrong(&self.path(key), item, "a text in quotes")),
        }
    }

    /// Three numbers `[x, y, z]`, each within `bound`, if the key is there.
    pub(crate) fn vec3(&self, key: &str, bound: Bound) -> Result<Option<[f64; 3]>, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(None);
        };
        let path = self.path(key);
        let expected = "three numbers [x, y, z]";
        let DeValue::Array(xs) = item.get_ref() else {
            return Err(self.wrong(&path, item, expected));
        };
        if xs.len() != 3 {
            return Err(self.doc.invalid(
                &item.span(),
                &path,
                expected,
                format!("{} values", xs.len()),
            ));
        }
        let mut out = [0.0; 3];
        for (i, x) in xs.iter().enumerate() {
            let v =
                as_number(x.get_ref()).ok_or_else(|| self.wrong(&path.index(i), x, "a number"))?;
            out[i] = check_bound(self.doc, &path.index(i), &x.span(), v, bound)?;
        }
        Ok(Some(out))
    }

    /// A list of texts, each with its span, if the key is there. Each item
    /// is recorded under `key[i]` so later checks can point at it.
    pub(crate) fn texts(
        &self,
        key: &str,
    ) -> Result<Option<Spanned<Vec<Spanned<String>>>>, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(None);
        };
        let path = self.path(key);
        let DeValue::Array(xs) = item.get_ref() else {
            return Err(self.wrong(&path, item, "a list of texts such as [\"a\", \"b\"]"));
        };
        let mut out = Vec::new();
        for (i, x) in xs.iter().enumerate() {
            match x.get_ref() {
                DeValue::String(s) => {
                    self.doc.record(&path.index(i), &x.span());
                    out.push(Spanned::new(x.span(), s.to_string()));
                }
                _ => return Err(self.wrong(&path.index(i), x, "a text in quotes")),
            }
        }
        Ok(Some(Spanned::new(item.span(), out)))
    }

    /// For a key that may take more than one form (a word or a list):
    /// which form the file wrote, if any.
    pub(crate) fn form(&self, key: &str) -> Option<Form> {
        let item = self.get(key)?;
        Some(match item.get_ref() {
            DeValue::String(_) => Form::Text,
            DeValue::Array(_) => Form::List,
            _ => Form::Other,
        })
    }

    /// A refusal of the form of a key's value ("expected ..., found the
    /// whole number 5").
    pub(crate) fn wrong_form(&self, key: &str, expected: &str) -> ProfileError {
        match self.get(key) {
            Some(item) => self.wrong(&self.path(key), item, expected),
            None => self.missing(key, expected),
        }
    }

    /// A sub-table (`[section.key]`); a left-out table reads as empty.
    pub(crate) fn table(
        &self,
        key: &str,
        keys: &'static [&'static str],
    ) -> Result<Table<'d>, ProfileError> {
        let path = self.path(key);
        match self.get(key) {
            None => Table::new(self.doc, path, None, self.span.clone(), keys),
            Some(item) => match item.get_ref() {
                DeValue::Table(t) => Table::new(self.doc, path, Some(t), item.span(), keys),
                _ => Err(self.wrong(&path, item, &format!("a table [{path}]"))),
            },
        }
    }

    /// Whether the file has this key at all.
    pub(crate) fn has(&self, key: &str) -> bool {
        self.map.is_some_and(|m| {
            m.iter().any(|(k, _)| {
                let name: &str = k.get_ref();
                name == key
            })
        })
    }

    /// A list of tables (`[[section.key]]`), each item a table.
    pub(crate) fn tables(
        &self,
        key: &str,
        keys: &'static [&'static str],
    ) -> Result<Vec<Table<'d>>, ProfileError> {
        let Some(item) = self.get(key) else {
            return Ok(Vec::new());
        };
        let path = self.path(key);
        let DeValue::Array(xs) = item.get_ref() else {
            return Err(self.wrong(&path, item, &format!("a list of [[{path}]] tables")));
        };
        let mut out = Vec::new();
        for (i, x) in xs.iter().enumerate() {
            match x.get_ref() {
                DeValue::Table(t) => out.push(Table::new(
                    self.doc,
                    path.index(i),
                    Some(t),
                    x.span(),
                    keys,
                )?),
                _ => return Err(self.wrong(&path.index(i), x, &format!("a [[{path}]] table"))),
            }
        }
        Ok(out)
    }
}

fn check_bound(
    doc: &Doc,
    path: &KeyPath,
    span: &Range<usize>,
    x: f64,
    bound: Bound,
) -> Result<f64, ProfileError> {
    if bound.admits(x) {
        Ok(x)
    } else {
        let unit = if bound.unit.is_empty() || !x.is_finite() {
            String::new()
        } else {
            format!(" {}", bound.unit)
        };
        Err(doc.invalid(span, path, bound.expected(x), format!("{}{unit}", num(x))))
    }
}

/// An integer or a float as a number (integers beyond what a double holds
/// exactly are still numbers; the bounds refuse them).
fn as_number(v: &DeValue) -> Option<f64> {
    match v {
        DeValue::Float(f) => f.as_str().parse::<f64>().ok(),
        DeValue::Integer(i) => i64::from_str_radix(i.as_str(), i.radix())
            .ok()
            .map(|n| n as f64)
            .or_else(|| i.as_str().parse::<f64>().ok()),
        _ => None,
    }
}

/// What the file holds, in our words, for "found ...".
fn describe(v: &DeValue) -> String {
    match v {
        DeValue::String(s) => format!("the text {:?}", clip(s)),
        DeValue::Integer(i) => format!("the whole number {i}"),
        DeValue::Float(f) => format!("the number {f}"),
        DeValue::Boolean(b) => format!("{b}"),
        DeValue::Datetime(d) => format!("the date {d}"),
        DeValue::Array(a) => format!("a list of {} values", a.len()),
        DeValue::Table(_) => "a table".to_string(),
    }
}

/// Long texts are cut in messages (a message stays one readable line).
pub(crate) fn clip(s: &str) -> String {
    const MAX: usize = 60;
    if s.chars().count() <= MAX {
        s.to_string()
    } else {
        let cut: String = s.chars().take(MAX).collect();
        format!("{cut}...")
    }
}

/// 1-based line and column of a byte offset.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text.as_bytes()[..offset];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |p| p + 1);
    let column = text
        .get(line_start..offset)
        .map_or(offset - line_start, |s| s.chars().count())
        + 1;
    (line, column)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn key_paths_are_dotted_and_count_from_one() {
        let p = KeyPath::section("cage").key("node").index(4).key("id");
        assert_eq!(p.as_str(), "cage.node[5].id");
        assert_eq!(p.parent().unwrap().as_str(), "cage.node[5]");
        assert_eq!(p.parent().unwrap().parent().unwrap().as_str(), "cage.node");
        assert_eq!(KeyPath::root().to_string(), "-");
    }

    #[test]
    fn line_col_counts_from_one() {
        assert_eq!(line_col("a\nbc\n", 3), (2, 2));
        assert_eq!(line_col("abc", 0), (1, 1));
    }

    #[test]
    fn a_documents_locations_match_line_col() {
        let text = "a = 1\n\nb = \"\u{e9}t\u{e9}\"\nc = 2\n";
        let doc = Doc::new(text, "t.toml");
        for offset in 0..=text.len() + 2 {
            let at = doc.location(&(offset..offset));
            assert_eq!(
                (at.line, at.column),
                line_col(text, offset),
                "offset {offset}"
            );
        }
    }

    #[test]
    fn bounds_say_which_side_was_missed() {
        let b = Bound::positive(100.0, "kg");
        assert!(b.admits(1.0) && !b.admits(0.0) && !b.admits(f64::NAN) && !b.admits(101.0));
        assert_eq!(b.expected(-1.0), "a positive number");
        assert!(b.expected(1e30).contains("no larger than 100 kg"));
    }
}
