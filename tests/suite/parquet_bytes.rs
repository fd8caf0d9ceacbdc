//! A Parquet file written byte by byte, so that the bad-input corpus can damage one declared field at a
//! time (a page size, a row count, a list length) while everything else stays valid.
//!
//! The layout follows the Apache Parquet format specification ("File format": `PAR1`, column chunks,
//! Thrift `FileMetaData`, its 4-byte little-endian length, `PAR1`; field numbers from `parquet.thrift`),
//! encoded with the Thrift compact protocol (Apache Thrift, `doc/specs/thrift-compact-protocol.md`). The
//! file is the plainest the format allows: one row group, required columns, one uncompressed PLAIN data
//! page per column, dates as INT32 days since 1970-01-01 with the DATE converted type, prices as DOUBLE.
//! The undamaged file must read exactly like the CSV it came from (case `parquet_hand_written_plain`),
//! which shows the writer is right before any damage is added.

/// One field to damage; `None` writes the file as it should be.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Damage {
    None,
    /// The first price column's data page declares 2 GiB − 1 decoded bytes.
    PageDecodedSize,
    /// The first price column's data page declares 2 GiB − 1 stored bytes.
    PageStoredSize,
    /// `FileMetaData.num_rows` and the row group's `num_rows` say 2^40 rows.
    RowCount,
    /// The list of row groups declares 2^31 entries.
    RowGroupListLength,
    /// The first price column's chunk declares 2^40 values, and so does its data page.
    ValueCount,
    /// The last column chunk declares itself 1 MiB long.
    ChunkPastEnd,
    /// The date column's schema element has field 10 (`logical_type`, a struct) declared as an empty list.
    LogicalTypeAsList,
    /// `FileMetaData.num_rows` appears twice, the second time (in the long field form) as 2^40.
    RowCountTwice,
}

/// Thrift compact protocol type codes.
const I32: u8 = 5;
const I64: u8 = 6;
const BINARY: u8 = 8;
const LIST: u8 = 9;
const STRUCT: u8 = 12;

#[derive(Default)]
struct W {
    out: Vec<u8>,
    last: Vec<i16>,
}

impl W {
    fn varint(&mut self, mut v: u64) {
        loop {
            let b = (v & 0x7f) as u8;
            v >>= 7;
            if v == 0 {
                self.out.push(b);
                return;
            }
            self.out.push(b | 0x80);
        }
    }
    fn zigzag(&mut self, v: i64) {
        self.varint(((v << 1) ^ (v >> 63)) as u64);
    }
    fn field(&mut self, id: i16, kind: u8) {
        let last = self.last.last_mut().expect("inside a struct");
        let delta = id - *last;
        assert!((1..=15).contains(&delta), "fields in order, close together");
        self.out.push(((delta as u8) << 4) | kind);
        *last = id;
    }
    /// A field header in the long form (type byte, then the field number), which allows any order.
    fn field_long(&mut self, id: i16, kind: u8) {
        self.out.push(kind);
        self.zigzag(id.into());
        *self.last.last_mut().expect("inside a struct") = id;
    }
    fn begin(&mut self) {
        self.last.push(0);
    }
    fn end(&mut self) {
        self.out.push(0);
        self.last.pop();
    }
    fn i32(&mut self, id: i16, v: i64) {
        self.field(id, I32);
        self.zigzag(v);
    }
    fn i64(&mut self, id: i16, v: i64) {
        self.field(id, I64);
        self.zigzag(v);
    }
    fn binary(&mut self, id: i16, b: &[u8]) {
        self.field(id, BINARY);
        self.varint(b.len() as u64);
        self.out.extend_from_slice(b);
    }
    fn list(&mut self, id: i16, elem: u8, n: u64) {
        self.field(id, LIST);
        if n < 15 {
            self.out.push(((n as u8) << 4) | elem);
        } else {
            self.out.push(0xf0 | elem);
            self.varint(n);
        }
    }
    fn struct_field(&mut self, id: i16) {
        self.field(id, STRUCT);
        self.begin();
    }
}

/// Days since 1970-01-01 of an ISO date.
fn days(iso: &str) -> i64 {
    let d = chrono::NaiveDate::parse_from_str(iso, "%Y-%m-%d").expect("ISO date");
    (d - chrono::NaiveDate::from_ymd_opt(1970, 1, 1).unwrap()).num_days()
}

/// The bytes of a Parquet file holding `date` and the price columns `assets`, with `damage` applied, and
/// the byte offset of the damaged record: the page header, the column chunk, or the damaged value in the
/// metadata (0 for `Damage::None`).
pub fn write(dates: &[String], assets: &[(&str, &[f64])], damage: Damage) -> (Vec<u8>, usize) {
    let rows = dates.len() as i64;
    let mut damaged_at = 0;
    let mut file = b"PAR1".to_vec();
    // (physical type, data page offset, chunk bytes) per column.
    let mut chunks: Vec<(i64, i64, i64)> = Vec::new();
    let columns: Vec<(i64, Vec<u8>)> = std::iter::once((
        1, // INT32
        dates
            .iter()
            .flat_map(|d| (days(d) as i32).to_le_bytes())
            .collect(),
    ))
    .chain(assets.iter().map(|(_, v)| {
        (
            5, // DOUBLE
            v.iter().flat_map(|x| x.to_le_bytes()).collect(),
        )
    }))
    .collect();
    for (i, (kind, body)) in columns.iter().enumerate() {
        let first_price = i == 1;
        let mut h = W::default();
        h.begin();
        h.i32(1, 0); // type: DATA_PAGE
        let size = body.len() as i64;
        h.i32(
            2,
            if first_price && damage == Damage::PageDecodedSize {
                i32::MAX.into()
            } else {
                size
            },
        );
        h.i32(
            3,
            if first_price && damage == Damage::PageStoredSize {
                i32::MAX.into()
            } else {
                size
            },
        );
        h.struct_field(5); // DataPageHeader
        h.i32(
            1,
            if first_price && damage == Damage::ValueCount {
                i32::MAX.into()
            } else {
                rows
            },
        );
        h.i32(2, 0); // encoding: PLAIN
        h.i32(3, 3); // definition levels: RLE
        h.i32(4, 3); // repetition levels: RLE
        h.end();
        h.end();
        let offset = file.len() as i64;
        if first_price && matches!(damage, Damage::PageDecodedSize | Damage::PageStoredSize) {
            damaged_at = file.len();
        }
        let len = (h.out.len() + body.len()) as i64;
        file.extend_from_slice(&h.out);
        file.extend_from_slice(body);
        chunks.push((*kind, offset, len));
    }
    let names: Vec<&str> = std::iter::once("date")
        .chain(assets.iter().map(|(n, _)| *n))
        .collect();
    let declared_rows = if damage == Damage::RowCount {
        1 << 40
    } else {
        rows
    };
    let meta_start = file.len();
    let mut m = W::default();
    m.begin();
    m.i32(1, 1); // version
    m.list(2, STRUCT, names.len() as u64 + 1); // schema: root, then the columns
    m.begin();
    m.binary(4, b"schema");
    m.i32(5, names.len() as i64);
    m.end();
    for (name, (kind, _, _)) in names.iter().zip(&chunks) {
        m.begin();
        m.i32(1, *kind);
        m.i32(3, 0); // REQUIRED
        m.binary(4, name.as_bytes());
        if *kind == 1 {
            m.i32(6, 6); // converted type: DATE
            if damage == Damage::LogicalTypeAsList {
                m.field(10, LIST);
                damaged_at = meta_start + m.out.len();
                m.out.push(0); // no entries, element type left 0
            }
        }
        m.end();
    }
    // A field header takes one byte here; the damaged value starts right after it.
    if damage == Damage::RowCount {
        damaged_at = meta_start + m.out.len() + 1;
    }
    m.i64(3, declared_rows);
    if damage == Damage::RowCountTwice {
        damaged_at = meta_start + m.out.len();
        m.field_long(3, I64);
        m.zigzag(1 << 40);
    }
    if damage == Damage::RowGroupListLength {
        damaged_at = meta_start + m.out.len() + 1;
    }
    m.list(
        4,
        STRUCT,
        if damage == Damage::RowGroupListLength {
            1 << 31
        } else {
            1
        },
    );
    m.begin(); // RowGroup
    m.list(1, STRUCT, chunks.len() as u64);
    let last = chunks.len() - 1;
    for (i, ((kind, offset, len), name)) in chunks.iter().zip(&names).enumerate() {
        if (i == 1 && damage == Damage::ValueCount) || (i == last && damage == Damage::ChunkPastEnd)
        {
            damaged_at = meta_start + m.out.len();
        }
        m.begin(); // ColumnChunk
        m.i64(2, *offset);
        m.struct_field(3); // ColumnMetaData
        m.i32(1, *kind);
        m.list(2, I32, 1);
        m.zigzag(0); // PLAIN
        m.list(3, BINARY, 1);
        m.varint(name.len() as u64);
        m.out.extend_from_slice(name.as_bytes());
        m.i32(4, 0); // UNCOMPRESSED
        m.i64(
            5,
            if i == 1 && damage == Damage::ValueCount {
                1 << 40
            } else {
                rows
            },
        );
        let stored = if i == last && damage == Damage::ChunkPastEnd {
            1 << 20
        } else {
            *len
        };
        m.i64(6, stored);
        m.i64(7, stored);
        m.i64(9, *offset);
        m.end();
        m.end();
    }
    let total: i64 = chunks.iter().map(|c| c.2).sum();
    m.i64(2, total);
    m.i64(3, declared_rows);
    m.end();
    m.end();
    file.extend_from_slice(&m.out);
    file.extend_from_slice(&(m.out.len() as u32).to_le_bytes());
    file.extend_from_slice(b"PAR1");
    (file, damaged_at)
}
