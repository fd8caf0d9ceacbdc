//! Checks a Parquet file's own bookkeeping before polars decodes it.
//!
//! polars trusts the sizes a Parquet file declares: the metadata length in the footer, list and string
//! lengths in the Thrift-encoded metadata, row and value counts, and the compressed and uncompressed size of
//! every page. It reserves memory for them before reading, so one damaged size field can ask for gigabytes
//! (which aborts the process, beyond any error handling) or make a file of a few hundred bytes decode for
//! many seconds. This module walks the footer and every page header itself, with a small reader of the
//! Thrift compact protocol that never allocates more than the bytes it has read, and refuses a file whose
//! declarations do not fit its size, naming the byte offset of the bad field.
//!
//! Formats followed: the Parquet file layout and `parquet.thrift` (Apache Parquet format specification,
//! "File format" and "Metadata"), and the Thrift compact protocol (Apache Thrift,
//! `doc/specs/thrift-compact-protocol.md`).

use crate::error::{Error, Result};
use std::path::Path;

/// The four bytes that open and close every Parquet file.
pub const MAGIC: &[u8; 4] = b"PAR1";

/// How many values (rows, column values, dictionary entries) a file may declare per byte of its size, on
/// top of [`VALUE_FLOOR`]. Price data does not compress below about a byte per value (every row has a
/// distinct date and prices whose low digits are noise), so a file declaring 64 per byte is damaged.
const VALUES_PER_BYTE: u64 = 64;
/// Values any file may declare whatever its size, so that small hand-made files are never refused.
const VALUE_FLOOR: u64 = 1 << 16;
/// How many decoded bytes a file may declare per byte of its size, on top of [`DECODED_FLOOR`]; general
/// compressors reach such ratios only on runs of one repeated byte.
const DECODED_PER_BYTE: u64 = 1024;
/// Decoded bytes any file may declare whatever its size.
const DECODED_FLOOR: u64 = 16 << 20;
/// Deepest nesting of Thrift structs and lists accepted; Parquet's own metadata nests about eight deep.
const MAX_DEPTH: usize = 32;

/// What the checks allow for a file of a given size.
#[derive(Debug, Clone, Copy)]
struct Limits {
    file_len: u64,
    values: u64,
    decoded: u64,
}

impl Limits {
    fn for_size(n: usize) -> Self {
        let n = n as u64;
        Limits {
            file_len: n,
            values: VALUE_FLOOR.saturating_add(n.saturating_mul(VALUES_PER_BYTE)),
            decoded: DECODED_FLOOR.saturating_add(n.saturating_mul(DECODED_PER_BYTE)),
        }
    }
}

/// A refusal: the byte offset in the file and what is wrong there.
struct Bad {
    at: usize,
    what: String,
}

type Check<T> = std::result::Result<T, Bad>;

fn bad<T>(at: usize, what: impl Into<String>) -> Check<T> {
    Err(Bad {
        at,
        what: what.into(),
    })
}

/// Checks the whole file: markers, footer length, metadata, and every page header polars will read.
/// The error names the file and the byte offset of the first field that does not fit.
pub fn check(path: &Path, bytes: &[u8]) -> Result<()> {
    let n = bytes.len();
    if n < 12 || !bytes.starts_with(MAGIC) {
        return Err(Error::data(
            path,
            format!(
                "byte 0: not a Parquet file (it is {n} bytes and does not start with the Parquet marker `PAR1`); write the prices as Parquet or CSV"
            ),
        ));
    }
    if !bytes.ends_with(MAGIC) {
        return Err(Error::data(
            path,
            format!(
                "byte {}: the Parquet file is truncated (it is {n} bytes and does not end with the Parquet marker `PAR1`); copy or write the file again",
                n - 4
            ),
        ));
    }
    check_body(bytes).map_err(|b| {
        Error::data(
            path,
            format!(
                "byte {}: the Parquet file is damaged: {}; write the file again from its source",
                b.at, b.what
            ),
        )
    })
}

fn check_body(bytes: &[u8]) -> Check<()> {
    let n = bytes.len();
    let len_at = n - 8;
    let meta_len =
        u32::from_le_bytes(bytes[len_at..n - 4].try_into().expect("four bytes")) as usize;
    // The metadata sits between the leading marker and the 8-byte tail (length + marker).
    if meta_len > n - 12 {
        return bad(
            len_at,
            format!(
                "its footer declares {meta_len} bytes of metadata, but the file is only {n} bytes"
            ),
        );
    }
    if meta_len == 0 {
        return bad(len_at, "its footer declares no metadata");
    }
    let meta_start = len_at - meta_len;
    let limits = Limits::for_size(n);
    let mut r = Reader::new(&bytes[..len_at], meta_start);
    let meta = r.read_struct(0)?;
    typed(&meta, &FILE_META_DATA)?;
    let file = FileMeta::from(&meta, meta_start, limits)?;
    for (g, group) in file.row_groups.iter().enumerate() {
        if group.columns.len() != file.leaves {
            return bad(
                group.at,
                format!(
                    "row group {} has {} column chunks where the schema has {} columns",
                    g + 1,
                    group.columns.len(),
                    file.leaves
                ),
            );
        }
        for chunk in &group.columns {
            check_chunk(bytes, meta_start, chunk, group.rows, limits)?;
        }
    }
    Ok(())
}

/// One column chunk: its byte range inside the data part of the file, then its pages one by one, as
/// polars reads them (from the dictionary page, or else the first data page, until the declared number of
/// values has been seen).
fn check_chunk(
    bytes: &[u8],
    meta_start: usize,
    c: &ChunkMeta,
    group_rows: u64,
    limits: Limits,
) -> Check<()> {
    let (start, end) = chunk_extent(bytes.len(), meta_start, c, group_rows, limits)?;
    check_pages(bytes, c, start, end, limits)
}

/// The chunk's byte range `(start, end)`, once its declared place, size and counts are within the file
/// and the limits.
fn chunk_extent(
    n: usize,
    meta_start: usize,
    c: &ChunkMeta,
    group_rows: u64,
    limits: Limits,
) -> Check<(usize, usize)> {
    let start = c.dictionary_page_offset.unwrap_or(c.data_page_offset);
    let data_end = meta_start as u64;
    if start < 4 || start >= data_end {
        return bad(
            c.at,
            format!(
                "a column chunk starts at byte {start}, outside the data part of the file (bytes 4 to {meta_start})"
            ),
        );
    }
    if c.compressed > data_end - start {
        return bad(
            c.at,
            format!(
                "a column chunk at byte {start} declares {} bytes, past the end of the data at byte {meta_start}",
                c.compressed
            ),
        );
    }
    within(
        c.at,
        "column chunk",
        "values",
        c.num_values,
        limits.values,
        n,
    )?;
    within(
        c.at,
        "column chunk",
        "decoded bytes",
        c.uncompressed,
        limits.decoded,
        n,
    )?;
    // A flat column holds one value (or null) per row.
    if c.num_values != group_rows {
        return bad(
            c.at,
            format!(
                "a column chunk declares {} values for a row group of {group_rows} rows",
                c.num_values
            ),
        );
    }
    Ok((start as usize, (start + c.compressed) as usize))
}

/// The chunk's pages in `bytes[start..end]`, one by one, until its declared number of values is seen.
fn check_pages(bytes: &[u8], c: &ChunkMeta, start: usize, end: usize, limits: Limits) -> Check<()> {
    let n = bytes.len();
    let mut pos = start;
    let (mut seen, mut decoded) = (0u64, 0u64);
    while seen < c.num_values {
        if pos >= end {
            return bad(
                pos,
                format!(
                    "the column chunk at byte {start} ends after {seen} of its {} values",
                    c.num_values
                ),
            );
        }
        let mut r = Reader::new(&bytes[..end], pos);
        let header = r.read_struct(0)?;
        typed(&header, &PAGE_HEADER)?;
        let page = PageMeta::from(&header, pos)?;
        let body = r.pos;
        if page.compressed > (end - body) as u64 {
            return bad(
                pos,
                format!(
                    "a page declares {} bytes, past the end of its column chunk at byte {end}",
                    page.compressed
                ),
            );
        }
        // The chunk's pages share one allowance of decoded bytes; `decoded` never exceeds it.
        let room = limits.decoded - decoded;
        within(pos, "page", "decoded bytes", page.uncompressed, room, n)?;
        decoded += page.uncompressed;
        within(pos, "page", "values", page.values, limits.values, n)?;
        if page.is_data {
            seen += page.values;
            if seen > c.num_values {
                return bad(
                    pos,
                    format!(
                        "the pages of the column chunk at byte {start} hold more values than the {} it declares",
                        c.num_values
                    ),
                );
            }
        }
        pos = body + page.compressed as usize;
    }
    Ok(())
}

/// Refuses a `noun` (column chunk, page) at byte `at` that declares more `counted` (values, decoded bytes)
/// than `limit`, what is left of the allowance of a file of `file_len` bytes.
fn within(
    at: usize,
    noun: &str,
    counted: &str,
    declared: u64,
    limit: u64,
    file_len: usize,
) -> Check<()> {
    if declared <= limit {
        return Ok(());
    }
    bad(
        at,
        format!(
            "a {noun} declares {declared} {counted}, far more than a file of {file_len} bytes can hold"
        ),
    )
}

/// What the checks need from `FileMetaData`.
struct FileMeta {
    leaves: usize,
    row_groups: Vec<GroupMeta>,
}

struct GroupMeta {
    at: usize,
    rows: u64,
    columns: Vec<ChunkMeta>,
}

struct ChunkMeta {
    at: usize,
    num_values: u64,
    uncompressed: u64,
    compressed: u64,
    data_page_offset: u64,
    dictionary_page_offset: Option<u64>,
}

struct PageMeta {
    is_data: bool,
    values: u64,
    uncompressed: u64,
    compressed: u64,
}

impl FileMeta {
    fn from(v: &Node<'_>, at: usize, limits: Limits) -> Check<Self> {
        let schema = v.list(2).ok_or(Bad {
            at,
            what: "its metadata has no schema".into(),
        })?;
        let leaves = check_schema(schema, at, limits.file_len)?;
        let rows = v.non_negative(3, "the row count", at)?.unwrap_or(0);
        if rows > limits.values {
            return bad(
                v.at(3).unwrap_or(at),
                format!("its metadata declares {rows} rows, far more than the file can hold"),
            );
        }
        let mut row_groups = Vec::new();
        let mut total = 0u64;
        for g in v.list(4).unwrap_or(&[]) {
            let gat = g.start;
            let grows = g
                .non_negative(3, "a row group's row count", gat)?
                .unwrap_or(0);
            total = total.saturating_add(grows);
            let mut columns = Vec::new();
            for c in g.list(1).unwrap_or(&[]) {
                columns.push(ChunkMeta::from(c)?);
            }
            row_groups.push(GroupMeta {
                at: gat,
                rows: grows,
                columns,
            });
        }
        if total != rows {
            return bad(
                v.at(3).unwrap_or(at),
                format!("its metadata declares {rows} rows, but its row groups hold {total}"),
            );
        }
        Ok(FileMeta { leaves, row_groups })
    }
}

/// A price file's schema is flat: a root whose children are all columns. Returns the number of columns.
fn check_schema(schema: &[Node<'_>], at: usize, file_len: u64) -> Check<usize> {
    let Some(root) = schema.first() else {
        return bad(at, "its schema is empty");
    };
    let columns = schema.len() - 1;
    let children = root.non_negative(5, "the schema's column count", root.start)?;
    if children != Some(columns as u64) {
        return bad(
            root.start,
            format!(
                "its schema declares {} columns but lists {columns}",
                children.map_or("no".into(), |c| c.to_string())
            ),
        );
    }
    for e in &schema[1..] {
        if e.non_negative(5, "a column's child count", e.start)?
            .unwrap_or(0)
            > 0
        {
            let name = e
                .bytes(4)
                .map(|b| String::from_utf8_lossy(b).into_owned())
                .unwrap_or_default();
            return bad(
                e.start,
                format!(
                    "column `{}` is a nested group; a price file holds flat columns (dates, text, numbers)",
                    super::truncate(&name, 40)
                ),
            );
        }
        // FIXED_LEN_BYTE_ARRAY values are `type_length` bytes each; one longer than the file is damage.
        if e.non_negative(2, "a column's value width", e.start)?
            .unwrap_or(0)
            > file_len
        {
            return bad(
                e.start,
                "a column declares values wider than the whole file",
            );
        }
    }
    Ok(columns)
}

impl ChunkMeta {
    fn from(c: &Node<'_>) -> Check<Self> {
        let at = c.start;
        if c.get(1).is_some() {
            return bad(
                at,
                "a column chunk lies in another file (`file_path` is set); write all columns into one file",
            );
        }
        let Some(m) = c.get(3).filter(|m| m.is_struct()) else {
            return bad(at, "a column chunk has no column metadata");
        };
        let need = |id: i16, what: &str| -> Check<u64> {
            m.non_negative(id, what, at)?.ok_or(Bad {
                at,
                what: format!("a column chunk has no {what}"),
            })
        };
        let num_values = need(5, "value count")?;
        let uncompressed = need(6, "decoded size")?;
        let compressed = need(7, "stored size")?;
        let data_page_offset = need(9, "data page offset")?;
        let dictionary_page_offset = m.non_negative(11, "dictionary page offset", at)?;
        Ok(ChunkMeta {
            at,
            num_values,
            uncompressed,
            compressed,
            data_page_offset,
            dictionary_page_offset,
        })
    }
}

impl PageMeta {
    fn from(h: &Node<'_>, at: usize) -> Check<Self> {
        let need = |id: i16, what: &str| -> Check<u64> {
            h.non_negative(id, what, at)?.ok_or(Bad {
                at,
                what: format!("a page header has no {what}"),
            })
        };
        let kind = need(1, "page type")?;
        let uncompressed = need(2, "decoded size")?;
        let compressed = need(3, "stored size")?;
        // Page types: 0 data, 1 index, 2 dictionary, 3 data (v2); each carries its counts in its own
        // header struct (fields 5, 6, 7 and 8 of `PageHeader`).
        let (is_data, sub) = match kind {
            0 => (true, 5),
            2 => (false, 7),
            3 => (true, 8),
            other => {
                return bad(
                    at,
                    format!("a page has type {other}, which a price file's columns do not use"),
                );
            }
        };
        let Some(s) = h.get(sub).filter(|s| s.is_struct()) else {
            return bad(
                at,
                format!("a page of type {kind} has no header for its type"),
            );
        };
        let values = s.non_negative(1, "a page's value count", at)?.unwrap_or(0);
        if kind == 3 {
            // v2: nulls and rows are counted among the values; level bytes are part of the stored bytes.
            for (id, what) in [(2, "null count"), (3, "row count")] {
                if s.non_negative(id, what, at)?.unwrap_or(0) > values {
                    return bad(at, format!("a page's {what} exceeds its {values} values"));
                }
            }
            let levels = s
                .non_negative(5, "definition level size", at)?
                .unwrap_or(0)
                .saturating_add(s.non_negative(6, "repetition level size", at)?.unwrap_or(0));
            if levels > compressed {
                return bad(
                    at,
                    format!("a page's levels take {levels} bytes of its {compressed}"),
                );
            }
        }
        Ok(PageMeta {
            is_data,
            values,
            uncompressed,
            compressed,
        })
    }
}

/// A decoded Thrift value. Every node stands for at least one byte of input, so a tree is never larger
/// than a small multiple of the bytes read.
#[derive(Debug)]
enum Value<'a> {
    Int(i64),
    Bytes(&'a [u8]),
    /// The fields of a struct by id, in the order read.
    Struct(Vec<(i16, Node<'a>)>),
    List(Vec<Node<'a>>),
    Other,
}

#[derive(Debug)]
struct Node<'a> {
    /// Byte offset in the file where the value starts.
    start: usize,
    /// The Thrift compact type the file declares for it (1 or 2 boolean, 3 byte, 4–6 integers, 7 double,
    /// 8 binary, 9 list, 10 set, 11 map, 12 struct).
    kind: u8,
    value: Value<'a>,
}

impl<'a> Node<'a> {
    fn get(&self, id: i16) -> Option<&Node<'a>> {
        match &self.value {
            Value::Struct(fields) => fields.iter().find(|(i, _)| *i == id).map(|(_, n)| n),
            _ => None,
        }
    }

    fn is_struct(&self) -> bool {
        matches!(self.value, Value::Struct(_))
    }

    fn list(&self, id: i16) -> Option<&[Node<'a>]> {
        match &self.get(id)?.value {
            Value::List(v) => Some(v),
            _ => None,
        }
    }

    fn at(&self, id: i16) -> Option<usize> {
        self.get(id).map(|n| n.start)
    }

    fn bytes(&self, id: i16) -> Option<&'a [u8]> {
        match self.get(id)?.value {
            Value::Bytes(b) => Some(b),
            _ => None,
        }
    }

    /// An integer field that must not be negative; absent gives `None`.
    fn non_negative(&self, id: i16, what: &str, at: usize) -> Check<Option<u64>> {
        if !self.is_struct() {
            return bad(self.start.max(at), "a metadata record is not a struct");
        }
        match self.get(id) {
            None => Ok(None),
            Some(Node {
                value: Value::Int(v),
                start,
                ..
            }) => {
                if *v < 0 {
                    bad(*start, format!("{what} is negative ({v})"))
                } else {
                    Ok(Some(*v as u64))
                }
            }
            Some(n) => bad(n.start, format!("{what} is not an integer")),
        }
    }
}

/// Reads the Thrift compact protocol from `buf[pos..]`; offsets are offsets into the file.
struct Reader<'a> {
    buf: &'a [u8],
    pos: usize,
}

impl<'a> Reader<'a> {
    fn new(buf: &'a [u8], pos: usize) -> Self {
        Reader { buf, pos }
    }

    fn byte(&mut self) -> Check<u8> {
        match self.buf.get(self.pos) {
            Some(b) => {
                self.pos += 1;
                Ok(*b)
            }
            None => bad(self.pos, "a metadata record runs past its end"),
        }
    }

    fn varint(&mut self) -> Check<u64> {
        let at = self.pos;
        let mut v = 0u64;
        for shift in (0..70).step_by(7) {
            let b = self.byte()?;
            if shift == 63 && b > 1 {
                break;
            }
            v |= u64::from(b & 0x7f) << shift;
            if b & 0x80 == 0 {
                return Ok(v);
            }
        }
        bad(at, "an integer in the metadata is longer than 64 bits")
    }

    fn zigzag(&mut self) -> Check<i64> {
        let v = self.varint()?;
        Ok((v >> 1) as i64 ^ -((v & 1) as i64))
    }

    /// A length that must fit in what is left, each element taking at least `min_each` bytes.
    fn length(&mut self, n: u64, min_each: usize, at: usize) -> Check<usize> {
        let left = (self.buf.len() - self.pos) as u64;
        if n.saturating_mul(min_each as u64) > left {
            return bad(
                at,
                format!(
                    "a metadata record declares {n} entries or bytes, but only {left} bytes follow"
                ),
            );
        }
        Ok(n as usize)
    }

    fn read_struct(&mut self, depth: usize) -> Check<Node<'a>> {
        let start = self.pos;
        if depth > MAX_DEPTH {
            return bad(start, "the metadata is nested too deeply");
        }
        let mut fields = Vec::new();
        let mut last = 0i16;
        loop {
            let at = self.pos;
            let b = self.byte()?;
            if b == 0 {
                break;
            }
            let (delta, kind) = (b >> 4, b & 0x0f);
            let id = if delta == 0 {
                let v = self.zigzag()?;
                i16::try_from(v).or_else(|_| bad(at, "a metadata field number is out of range"))?
            } else {
                last.checked_add(i16::from(delta)).ok_or(Bad {
                    at,
                    what: "a metadata field number is out of range".into(),
                })?
            };
            last = id;
            // Readers keep the last of repeated fields, these checks the first: refuse repeats.
            if fields.iter().any(|(i, _)| *i == id) {
                return bad(at, format!("a metadata record has field {id} twice"));
            }
            let value = match kind {
                1 => Node {
                    start: at,
                    kind,
                    value: Value::Int(1),
                },
                2 => Node {
                    start: at,
                    kind,
                    value: Value::Int(0),
                },
                _ => self.read_value(kind, depth + 1)?,
            };
            fields.push((id, value));
        }
        Ok(Node {
            start,
            kind: 12,
            value: Value::Struct(fields),
        })
    }

    fn read_value(&mut self, kind: u8, depth: usize) -> Check<Node<'a>> {
        let start = self.pos;
        if depth > MAX_DEPTH {
            return bad(start, "the metadata is nested too deeply");
        }
        let value = match kind {
            // Not reached from a struct (its booleans are in the field header) nor from a list (refused).
            1 | 2 => {
                self.byte()?;
                Value::Other
            }
            3 => Value::Int(i64::from(self.byte()? as i8)),
            4..=6 => Value::Int(self.zigzag()?),
            7 => {
                let n = self.length(8, 1, start)?;
                self.pos += n;
                Value::Other
            }
            8 => {
                let len = self.varint()?;
                let n = self.length(len, 1, start)?;
                let a = self.pos;
                self.pos += n;
                Value::Bytes(&self.buf[a..a + n])
            }
            9 | 10 => self.read_list(start, depth)?,
            11 => self.read_map(start, depth)?,
            12 => return self.read_struct(depth),
            other => return bad(start, format!("a metadata field has unknown type {other}")),
        };
        Ok(Node { start, kind, value })
    }

    /// A list or set (compact types 9, 10) whose header starts at `start`.
    fn read_list(&mut self, start: usize, depth: usize) -> Check<Value<'a>> {
        let h = self.byte()?;
        let (size, elem) = (u64::from(h >> 4), h & 0x0f);
        let size = if size == 15 { self.varint()? } else { size };
        // Readers disagree on a boolean in a list (one byte, or none when skipped by polars'
        // footer decoder), and `parquet.thrift` has no list of booleans: refuse one.
        if size > 0 && (elem == 1 || elem == 2) {
            return bad(
                start,
                "a metadata list holds booleans, which the format never has",
            );
        }
        let n = self.length(size, 1, start)?;
        let mut items = Vec::with_capacity(n);
        for _ in 0..n {
            items.push(self.read_value(elem, depth + 1)?);
        }
        Ok(Value::List(items))
    }

    /// A map (compact type 11) whose header starts at `start`: read through, its content not kept.
    fn read_map(&mut self, start: usize, depth: usize) -> Check<Value<'a>> {
        let size = self.varint()?;
        let n = self.length(size, 2, start)?;
        if n > 0 {
            let kv = self.byte()?;
            for _ in 0..n {
                self.read_value(kv >> 4, depth + 1)?;
                self.read_value(kv & 0x0f, depth + 1)?;
            }
        }
        Ok(Value::Other)
    }
}

/// The Thrift type of a Parquet metadata field, as `parquet.thrift` declares it.
#[derive(Debug, Clone, Copy)]
enum Ty {
    Bool,
    I8,
    I16,
    I32,
    I64,
    Binary,
    List(&'static Ty),
    Struct(&'static Record),
}

/// A Thrift struct of `parquet.thrift`: its name and the types of its fields by id.
#[derive(Debug)]
struct Record {
    name: &'static str,
    fields: &'static [(i16, Ty)],
}

impl Ty {
    fn accepts(self, kind: u8) -> bool {
        match self {
            Ty::Bool => kind == 1 || kind == 2,
            Ty::I8 => kind == 3,
            Ty::I16 => kind == 4,
            Ty::I32 => kind == 5,
            Ty::I64 => kind == 6,
            Ty::Binary => kind == 8,
            Ty::List(_) => kind == 9,
            Ty::Struct(_) => kind == 12,
        }
    }

    fn name(self) -> String {
        let s = match self {
            Ty::Bool => "a boolean",
            Ty::I8 => "an 8-bit integer",
            Ty::I16 => "a 16-bit integer",
            Ty::I32 => "a 32-bit integer",
            Ty::I64 => "a 64-bit integer",
            Ty::Binary => "a string",
            Ty::List(_) => "a list",
            Ty::Struct(r) => return format!("a struct ({})", r.name),
        };
        s.into()
    }
}

/// The name of a Thrift compact type code, for messages.
fn kind_name(kind: u8) -> &'static str {
    match kind {
        1 | 2 => "a boolean",
        3 => "an 8-bit integer",
        4 => "a 16-bit integer",
        5 => "a 32-bit integer",
        6 => "a 64-bit integer",
        7 => "a double",
        8 => "a string",
        9 => "a list",
        10 => "a set",
        11 => "a map",
        _ => "a struct",
    }
}

/// Checks that every field `parquet.thrift` defines has the type it defines there, in `node` (a struct of
/// `record`) and below. Readers go by field number and read the type they expect whatever the file
/// declares (polars' footer decoder and the generated page-header code alike), while this module's reader
/// goes by the declared type: a field declared as a string but read as a list would let bytes these checks
/// skipped be taken for a list length, and ask for gigabytes. Fields the format does not define are
/// skipped by every reader by their declared type, so they need no check.
fn typed(node: &Node<'_>, record: &'static Record) -> Check<()> {
    let Value::Struct(fields) = &node.value else {
        return bad(
            node.start,
            format!("a {} record is not a struct", record.name),
        );
    };
    for (id, field) in fields {
        let Some((_, ty)) = record.fields.iter().find(|(i, _)| i == id) else {
            continue;
        };
        check_type(field, *ty, &|| format!("field {id} of {}", record.name))?;
    }
    Ok(())
}

fn check_type(node: &Node<'_>, ty: Ty, what: &dyn Fn() -> String) -> Check<()> {
    if !ty.accepts(node.kind) {
        return bad(
            node.start,
            format!(
                "{} is {} where the format has {}",
                what(),
                kind_name(node.kind),
                ty.name()
            ),
        );
    }
    match (ty, &node.value) {
        (Ty::Struct(r), _) => typed(node, r),
        (Ty::List(elem), Value::List(items)) => {
            for (k, item) in items.iter().enumerate() {
                check_type(item, *elem, &|| format!("entry {} of {}", k + 1, what()))?;
            }
            Ok(())
        }
        _ => Ok(()),
    }
}

// The records below follow `parquet.thrift` of the Apache Parquet format (field numbers and types; enums
// are 32-bit integers, unions are structs). Only what a reader of this project's files decodes is needed,
// but every defined field is listed so that a file is held to the format as a whole.
const EMPTY: Record = Record {
    name: "a marker without fields",
    fields: &[],
};
const STATISTICS: Record = Record {
    name: "Statistics",
    fields: &[
        (1, Ty::Binary),
        (2, Ty::Binary),
        (3, Ty::I64),
        (4, Ty::I64),
        (5, Ty::Binary),
        (6, Ty::Binary),
        (7, Ty::Bool),
        (8, Ty::Bool),
    ],
};
const DECIMAL_TYPE: Record = Record {
    name: "DecimalType",
    fields: &[(1, Ty::I32), (2, Ty::I32)],
};
const TIME_UNIT: Record = Record {
    name: "TimeUnit",
    fields: &[
        (1, Ty::Struct(&EMPTY)),
        (2, Ty::Struct(&EMPTY)),
        (3, Ty::Struct(&EMPTY)),
    ],
};
const TIME_TYPE: Record = Record {
    name: "TimeType or TimestampType",
    fields: &[(1, Ty::Bool), (2, Ty::Struct(&TIME_UNIT))],
};
const INT_TYPE: Record = Record {
    name: "IntType",
    fields: &[(1, Ty::I8), (2, Ty::Bool)],
};
const LOGICAL_TYPE: Record = Record {
    name: "LogicalType",
    fields: &[
        (1, Ty::Struct(&EMPTY)),
        (2, Ty::Struct(&EMPTY)),
        (3, Ty::Struct(&EMPTY)),
        (4, Ty::Struct(&EMPTY)),
        (5, Ty::Struct(&DECIMAL_TYPE)),
        (6, Ty::Struct(&EMPTY)),
        (7, Ty::Struct(&TIME_TYPE)),
        (8, Ty::Struct(&TIME_TYPE)),
        (10, Ty::Struct(&INT_TYPE)),
        (11, Ty::Struct(&EMPTY)),
        (12, Ty::Struct(&EMPTY)),
        (13, Ty::Struct(&EMPTY)),
        (14, Ty::Struct(&EMPTY)),
        (15, Ty::Struct(&EMPTY)),
    ],
};
const SCHEMA_ELEMENT: Record = Record {
    name: "SchemaElement",
    fields: &[
        (1, Ty::I32),
        (2, Ty::I32),
        (3, Ty::I32),
        (4, Ty::Binary),
        (5, Ty::I32),
        (6, Ty::I32),
        (7, Ty::I32),
        (8, Ty::I32),
        (9, Ty::I32),
        (10, Ty::Struct(&LOGICAL_TYPE)),
    ],
};
const KEY_VALUE: Record = Record {
    name: "KeyValue",
    fields: &[(1, Ty::Binary), (2, Ty::Binary)],
};
const PAGE_ENCODING_STATS: Record = Record {
    name: "PageEncodingStats",
    fields: &[(1, Ty::I32), (2, Ty::I32), (3, Ty::I32)],
};
const SIZE_STATISTICS: Record = Record {
    name: "SizeStatistics",
    fields: &[
        (1, Ty::I64),
        (2, Ty::List(&Ty::I64)),
        (3, Ty::List(&Ty::I64)),
    ],
};
const COLUMN_META_DATA: Record = Record {
    name: "ColumnMetaData",
    fields: &[
        (1, Ty::I32),
        (2, Ty::List(&Ty::I32)),
        (3, Ty::List(&Ty::Binary)),
        (4, Ty::I32),
        (5, Ty::I64),
        (6, Ty::I64),
        (7, Ty::I64),
        (8, Ty::List(&Ty::Struct(&KEY_VALUE))),
        (9, Ty::I64),
        (10, Ty::I64),
        (11, Ty::I64),
        (12, Ty::Struct(&STATISTICS)),
        (13, Ty::List(&Ty::Struct(&PAGE_ENCODING_STATS))),
        (14, Ty::I64),
        (15, Ty::I32),
        (16, Ty::Struct(&SIZE_STATISTICS)),
    ],
};
const COLUMN_KEY: Record = Record {
    name: "EncryptionWithColumnKey",
    fields: &[(1, Ty::List(&Ty::Binary)), (2, Ty::Binary)],
};
const COLUMN_CRYPTO: Record = Record {
    name: "ColumnCryptoMetaData",
    fields: &[(1, Ty::Struct(&EMPTY)), (2, Ty::Struct(&COLUMN_KEY))],
};
const COLUMN_CHUNK: Record = Record {
    name: "ColumnChunk",
    fields: &[
        (1, Ty::Binary),
        (2, Ty::I64),
        (3, Ty::Struct(&COLUMN_META_DATA)),
        (4, Ty::I64),
        (5, Ty::I32),
        (6, Ty::I64),
        (7, Ty::I32),
        (8, Ty::Struct(&COLUMN_CRYPTO)),
        (9, Ty::Binary),
    ],
};
const SORTING_COLUMN: Record = Record {
    name: "SortingColumn",
    fields: &[(1, Ty::I32), (2, Ty::Bool), (3, Ty::Bool)],
};
const ROW_GROUP: Record = Record {
    name: "RowGroup",
    fields: &[
        (1, Ty::List(&Ty::Struct(&COLUMN_CHUNK))),
        (2, Ty::I64),
        (3, Ty::I64),
        (4, Ty::List(&Ty::Struct(&SORTING_COLUMN))),
        (5, Ty::I64),
        (6, Ty::I64),
        (7, Ty::I16),
    ],
};
const COLUMN_ORDER: Record = Record {
    name: "ColumnOrder",
    fields: &[(1, Ty::Struct(&EMPTY)), (2, Ty::Struct(&EMPTY))],
};
const AES_GCM: Record = Record {
    name: "AesGcmV1 or AesGcmCtrV1",
    fields: &[(1, Ty::Binary), (2, Ty::Binary), (3, Ty::Bool)],
};
const ENCRYPTION_ALGORITHM: Record = Record {
    name: "EncryptionAlgorithm",
    fields: &[(1, Ty::Struct(&AES_GCM)), (2, Ty::Struct(&AES_GCM))],
};
const FILE_META_DATA: Record = Record {
    name: "FileMetaData",
    fields: &[
        (1, Ty::I32),
        (2, Ty::List(&Ty::Struct(&SCHEMA_ELEMENT))),
        (3, Ty::I64),
        (4, Ty::List(&Ty::Struct(&ROW_GROUP))),
        (5, Ty::List(&Ty::Struct(&KEY_VALUE))),
        (6, Ty::Binary),
        (7, Ty::List(&Ty::Struct(&COLUMN_ORDER))),
        (8, Ty::Struct(&ENCRYPTION_ALGORITHM)),
        (9, Ty::Binary),
    ],
};
const DATA_PAGE_HEADER: Record = Record {
    name: "DataPageHeader",
    fields: &[
        (1, Ty::I32),
        (2, Ty::I32),
        (3, Ty::I32),
        (4, Ty::I32),
        (5, Ty::Struct(&STATISTICS)),
    ],
};
const DICTIONARY_PAGE_HEADER: Record = Record {
    name: "DictionaryPageHeader",
    fields: &[(1, Ty::I32), (2, Ty::I32), (3, Ty::Bool)],
};
const DATA_PAGE_HEADER_V2: Record = Record {
    name: "DataPageHeaderV2",
    fields: &[
        (1, Ty::I32),
        (2, Ty::I32),
        (3, Ty::I32),
        (4, Ty::I32),
        (5, Ty::I32),
        (6, Ty::I32),
        (7, Ty::Bool),
        (8, Ty::Struct(&STATISTICS)),
    ],
};
const PAGE_HEADER: Record = Record {
    name: "PageHeader",
    fields: &[
        (1, Ty::I32),
        (2, Ty::I32),
        (3, Ty::I32),
        (4, Ty::I32),
        (5, Ty::Struct(&DATA_PAGE_HEADER)),
        (6, Ty::Struct(&EMPTY)),
        (7, Ty::Struct(&DICTIONARY_PAGE_HEADER)),
        (8, Ty::Struct(&DATA_PAGE_HEADER_V2)),
    ],
};
