//! Sizing an old-style `.xls` workbook before calamine reads it.
//!
//! An `.xls` file is a compound file (a small file system of fixed-size
//! sectors, with an allocation table chaining them into streams: Microsoft's
//! [MS-CFB] specification) holding a `Workbook` stream of BIFF8 records
//! ([MS-XLS]). calamine reads every sheet when it opens the file, sizing
//! its memory by what the file declares: sector numbers, stream lengths, a
//! sheet's declared dimensions, and the box from its first to its last cell.
//! A damaged or crafted file can declare terabytes, and an allocation that
//! large stops the process outright, so it cannot be caught.
//!
//! This module walks the same structures first, with every step bounded
//! by the file's own size, and refuses a file whose numbers do not fit in
//! it (damaged) or whose sheets would lay out more cells than
//! [`SheetLimits::max_cells`]. It reads; it keeps nothing but the counts.

use super::read::SheetLimits;

/// First bytes of a compound file.
const SIGNATURE: [u8; 8] = [0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];
/// Sector numbers at and above this one are markers, not sectors.
const MAX_REGULAR: u32 = 0xFFFF_FFFA;
/// Marks the end of a chain.
const END_OF_CHAIN: u32 = 0xFFFF_FFFE;
/// Allocation-table entries at and above this one name no table sector.
const DIFAT_MARK: u32 = 0xFFFF_FFFC;
/// Streams shorter than this live in the mini stream, in 64-byte sectors.
const MINI_CUTOFF: u64 = 4096;
const MINI_SECTOR: usize = 64;
/// Bytes calamine sets aside per entry of the header's (misread) count of
/// extra allocation-table sectors; kept well below memory.
const MAX_DIFAT_ENTRIES: u64 = 1 << 24;

/// BIFF record types read here.
const BOUNDSHEET: u16 = 0x0085;
const EOF: u16 = 0x000A;
const CONTINUE: u16 = 0x003C;
const DIMENSIONS: u16 = 0x0200;
const MULRK: u16 = 0x00BD;
/// Records that hold one cell, its row and column first.
const ONE_CELL: [u16; 6] = [0x0203, 0x0204, 0x0205, 0x027E, 0x00FD, 0x0006];

fn u16_at(b: &[u8], at: usize) -> Option<u16> {
    b.get(at..at + 2).map(|s| u16::from_le_bytes([s[0], s[1]]))
}

fn u32_at(b: &[u8], at: usize) -> Option<u32> {
    b.get(at..at + 4)
        .map(|s| u32::from_le_bytes([s[0], s[1], s[2], s[3]]))
}

fn u64_at(b: &[u8], at: usize) -> Option<u64> {
    b.get(at..at + 8).map(|s| {
        let mut a = [0u8; 8];
        a.copy_from_slice(s);
        u64::from_le_bytes(a)
    })
}

fn damaged(why: impl std::fmt::Display) -> String {
    format!(
        "the .xls workbook is damaged ({why}); open it in a spreadsheet program and save it again, or save the sheet as a CSV file"
    )
}

/// The sectors of a compound file.
struct Sectors<'a> {
    bytes: &'a [u8],
    size: usize,
    count: usize,
}

impl<'a> Sectors<'a> {
    /// Sector `id` (the last one may be short).
    fn get(&self, id: u32) -> &'a [u8] {
        let start = (id as usize + 1).saturating_mul(self.size);
        let end = start.saturating_add(self.size).min(self.bytes.len());
        self.bytes.get(start..end).unwrap_or(&[])
    }

    /// Follows a chain from `start` through `table`, each id below `units`;
    /// returns the ids. A chain that leaves the file or loops is damage.
    fn chain(start: u32, table: &[u32], units: usize, what: &str) -> Result<Vec<u32>, String> {
        let mut ids = Vec::new();
        let mut id = start;
        while id != END_OF_CHAIN {
            if id as usize >= units || id as usize >= table.len() {
                return Err(damaged(format!(
                    "the {what} runs to sector {id}, past the end of the file"
                )));
            }
            if ids.len() >= units {
                return Err(damaged(format!("the {what} loops")));
            }
            ids.push(id);
            id = table[id as usize];
        }
        Ok(ids)
    }
}

/// A directory entry: name, kind, first sector, length.
struct Entry {
    name: String,
    /// 1 storage, 2 stream, 5 root.
    kind: u8,
    start: u32,
    len: u64,
}

/// A compound file padded with zeros to a whole number of sectors; other
/// bytes as they are. calamine reads a file cut inside a sector as the
/// short sector the first time and as the sector padded with zeros after
/// (its sector cache grows to whole sectors), and a directory sector cut
/// short as a last, shorter entry: two views of one file that a check
/// cannot both follow. Padded, the file has one view, the one
/// [`check_xls`] checks and calamine then reads.
pub(crate) fn whole_sectors(bytes: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    let size = match u16_at(bytes, 30) {
        Some(9) => 512usize,
        Some(12) => 4096,
        _ => return std::borrow::Cow::Borrowed(bytes),
    };
    if !bytes.starts_with(&SIGNATURE) {
        return std::borrow::Cow::Borrowed(bytes);
    }
    let whole = bytes.len().max(size).div_ceil(size) * size;
    if whole == bytes.len() {
        return std::borrow::Cow::Borrowed(bytes);
    }
    let mut padded = Vec::with_capacity(whole);
    padded.extend_from_slice(bytes);
    padded.resize(whole, 0);
    std::borrow::Cow::Owned(padded)
}

/// Checks an `.xls` workbook (a compound file) before calamine opens it.
/// Other bytes pass unchanged (calamine, or the CSV reader, names them).
pub(crate) fn check_xls(bytes: &[u8], limits: &SheetLimits) -> Result<(), String> {
    if !bytes.starts_with(&SIGNATURE) || bytes.len() < 512 {
        return Ok(());
    }
    let size = match u16_at(bytes, 30) {
        Some(9) => 512usize,
        Some(12) => 4096,
        // calamine refuses other sector sizes itself.
        _ => return Ok(()),
    };
    let file_len = bytes.len() as u64;
    let sectors = Sectors {
        bytes,
        size,
        count: bytes.len().saturating_sub(size).div_ceil(size),
    };
    let n = sectors.count;
    let header = |at| u32_at(bytes, at).unwrap_or(0);
    let (dir_len, fat_len, dir_start) = (header(40), header(44), header(48));
    let (mini_fat_start, mini_fat_len, difat_start) = (header(60), header(64), header(68));
    // calamine sizes its reading by these before it checks them.
    if u64::from(dir_len) * size as u64 > file_len
        || fat_len as usize > n + 1
        || u64::from(mini_fat_len) * size as u64 > file_len
        || u64::from(header(62)) > MAX_DIFAT_ENTRIES
    {
        return Err(damaged(
            "its header declares more sectors than the file holds",
        ));
    }

    // The allocation table, from the sectors the header and its extension
    // list.
    let mut difat: Vec<u32> = bytes[76..512]
        .chunks_exact(4)
        .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect();
    let mut id = difat_start;
    let mut steps = 0usize;
    while id < MAX_REGULAR {
        if id as usize >= n || steps > n {
            return Err(damaged("its sector table's list leaves the file or loops"));
        }
        difat.extend(
            sectors
                .get(id)
                .chunks_exact(4)
                .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]])),
        );
        id = difat.pop().unwrap_or(END_OF_CHAIN);
        steps += 1;
    }
    let mut fat = Vec::new();
    for &id in difat.iter().filter(|id| **id < DIFAT_MARK) {
        if id as usize >= n {
            return Err(damaged(format!(
                "its sector table is said to be in sector {id}, past the end of the file"
            )));
        }
        fat.extend(
            sectors
                .get(id)
                .chunks_exact(4)
                .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]])),
        );
    }

    // The directory.
    let dir_ids = Sectors::chain(dir_start, &fat, n, "directory")?;
    let dir: Vec<u8> = dir_ids
        .iter()
        .flat_map(|&i| sectors.get(i))
        .copied()
        .collect();
    let entries: Vec<Entry> = dir
        .chunks(128)
        .filter(|c| c.len() == 128)
        .map(|c| {
            let units: Vec<u16> = c[..64]
                .chunks_exact(2)
                .map(|p| u16::from_le_bytes([p[0], p[1]]))
                .take_while(|u| *u != 0)
                .collect();
            Entry {
                name: String::from_utf16_lossy(&units),
                kind: c[66],
                start: u32_at(c, 116).unwrap_or(END_OF_CHAIN),
                len: if size == 512 {
                    u64::from(u32_at(c, 120).unwrap_or(0))
                } else {
                    u64_at(c, 120).unwrap_or(0)
                },
            }
        })
        .collect();
    let Some(root) = entries.first() else {
        return Ok(());
    };

    // The mini stream and its table, when there is one.
    let (mini, mini_fat) = if mini_fat_len > 0 {
        if root.len > file_len {
            return Err(damaged("its mini stream is longer than the file"));
        }
        let ids = Sectors::chain(root.start, &fat, n, "mini stream")?;
        let mini: Vec<u8> = ids.iter().flat_map(|&i| sectors.get(i)).copied().collect();
        let mini_len = mini.len().min(root.len as usize);
        let table_ids = Sectors::chain(mini_fat_start, &fat, n, "mini stream's table")?;
        let table: Vec<u32> = table_ids
            .iter()
            .flat_map(|&i| sectors.get(i))
            .copied()
            .collect::<Vec<u8>>()
            .chunks_exact(4)
            .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
            .collect();
        (mini[..mini_len].to_vec(), table)
    } else {
        (Vec::new(), Vec::new())
    };
    let mini_units = mini.len().div_ceil(MINI_SECTOR);

    // Every stream a reader may open, and the workbook's bytes.
    let read_stream = |e: &Entry| -> Result<Vec<u8>, String> {
        if e.len > file_len {
            return Err(damaged(format!(
                "its stream '{}' is said to hold {} bytes, more than the file",
                e.name, e.len
            )));
        }
        let mut out = Vec::new();
        if e.len < MINI_CUTOFF {
            for id in Sectors::chain(e.start, &mini_fat, mini_units, "mini stream chain")? {
                let at = id as usize * MINI_SECTOR;
                out.extend_from_slice(&mini[at..(at + MINI_SECTOR).min(mini.len())]);
            }
        } else {
            for id in Sectors::chain(e.start, &fat, n, "stream chain")? {
                out.extend_from_slice(sectors.get(id));
            }
        }
        // calamine cuts a stream to its declared length only when that is
        // above zero: a stream said to hold 0 bytes is read whole, so it is
        // checked whole.
        if e.len > 0 {
            out.truncate(e.len as usize);
        }
        Ok(out)
    };
    let workbook = entries
        .iter()
        .find(|e| e.name == "Workbook")
        .or_else(|| entries.iter().find(|e| e.name == "Book"));
    // calamine also opens the macro streams when there are any, by name
    // whatever an entry's kind says: the chain of every stream, and of any
    // other entry that declares a length, must hold.
    for e in entries.iter().skip(1).filter(|e| e.kind == 2 || e.len > 0) {
        read_stream(e)?;
    }
    match workbook {
        Some(w) => check_sheets(&read_stream(w)?, limits),
        None => Ok(()),
    }
}

/// Records of a BIFF stream from `at`: (type, data), stopping at the end
/// or at a record that runs past it.
fn records(stream: &[u8], at: usize) -> impl Iterator<Item = (u16, &[u8])> {
    let mut pos = at;
    std::iter::from_fn(move || {
        let typ = u16_at(stream, pos)?;
        let len = u16_at(stream, pos + 2)? as usize;
        let data = stream.get(pos + 4..pos + 4 + len)?;
        pos += 4 + len;
        Some((typ, data))
    })
}

/// The cells each sheet would be laid out in, from the box of its cells and
/// its declared dimensions, against the limit.
fn check_sheets(stream: &[u8], limits: &SheetLimits) -> Result<(), String> {
    let max = limits.max_cells as u64;
    let too_many = |what: String| {
        format!(
            "{what}; provisio stops at {max} cells, as a sheet this large is more often damaged or built to exhaust memory than real data. If it is genuine, raise the limit with the environment variable {}=N, or save the sheet as a CSV file",
            SheetLimits::CELLS_VAR
        )
    };
    let mut starts = Vec::new();
    for (typ, data) in records(stream, 0) {
        match typ {
            BOUNDSHEET => starts.extend(u32_at(data, 0)),
            EOF => break,
            _ => {}
        }
    }
    let mut total = 0u64;
    for (k, &start) in starts.iter().enumerate() {
        let sheet = k + 1;
        if start as usize > stream.len() {
            return Err(damaged(format!(
                "sheet {sheet} is said to start past the end of the workbook"
            )));
        }
        let mut bounds: Option<(u32, u32, u32, u32)> = None;
        let mut take = |r: u32, c0: u32, c1: u32| {
            let b = bounds.get_or_insert((r, r, c0, c1));
            *b = (b.0.min(r), b.1.max(r), b.2.min(c0), b.3.max(c1));
        };
        for (typ, data) in records(stream, start as usize) {
            match typ {
                EOF => break,
                CONTINUE => {}
                DIMENSIONS => {
                    let Some(declared) = dimensions(data) else {
                        return Err(damaged(format!(
                            "sheet {sheet} declares its last row or column before its first"
                        )));
                    };
                    if declared > max {
                        return Err(too_many(format!(
                            "sheet {sheet} of the workbook declares dimensions of {declared} cells"
                        )));
                    }
                }
                MULRK => {
                    if let (Some(r), Some(c0), Some(c1)) = (
                        u16_at(data, 0),
                        u16_at(data, 2),
                        data.len().checked_sub(2).and_then(|at| u16_at(data, at)),
                    ) {
                        if c1 >= c0 {
                            take(r.into(), c0.into(), c1.into());
                        }
                    }
                }
                t if ONE_CELL.contains(&t) => {
                    if let (Some(r), Some(c)) = (u16_at(data, 0), u16_at(data, 2)) {
                        take(r.into(), c.into(), c.into());
                    }
                }
                _ => {}
            }
        }
        if let Some((r0, r1, c0, c1)) = bounds {
            let grid = u64::from(r1 - r0 + 1) * u64::from(c1 - c0 + 1);
            total = total.saturating_add(grid);
            if total > max {
                return Err(too_many(format!(
                    "the cells of sheet {sheet} of the workbook span rows {} to {} and columns {} to {} ({grid} cells once laid out: a cell far from the data, or a damaged file)",
                    r0 + 1,
                    r1 + 1,
                    super::sheet::column_letter(c0),
                    super::sheet::column_letter(c1)
                )));
            }
        }
    }
    Ok(())
}

/// Cells a DIMENSIONS record makes calamine set aside (its rows and
/// columns as calamine reads them), or `None` when the last row or column
/// comes before the first.
fn dimensions(data: &[u8]) -> Option<u64> {
    let (rf, rl, mut cf, cl) = match data.len() {
        10 => (
            u32::from(u16_at(data, 0)?),
            u32::from(u16_at(data, 2)?),
            u32::from(u16_at(data, 4)?),
            u32::from(u16_at(data, 6)?),
        ),
        14 => (
            u32_at(data, 0)?,
            u32_at(data, 4)?,
            u32::from(u16_at(data, 8)?),
            u32::from(u16_at(data, 10)?),
        ),
        // calamine refuses other lengths itself.
        _ => return Some(0),
    };
    if cf > 0xFF || cl < cf {
        cf = 0;
    }
    if rl == 0 || cl == 0 {
        return Some(1);
    }
    let rows = u64::from(rl - 1).checked_sub(u64::from(rf))? + 1;
    let cols = u64::from(cl - 1).checked_sub(u64::from(cf))? + 1;
    Some(rows * cols)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_cut_compound_file_is_padded_to_whole_sectors() {
        // MS-CFB §2.2: a 512-byte header, then sectors of 2^(sector
        // shift) bytes (offset 30; 9 → 512, 12 → 4096).
        let mut b = SIGNATURE.to_vec();
        b.resize(512, 0);
        b[30] = 9;
        b.extend([7u8; 700]);
        let padded = whole_sectors(&b);
        assert_eq!(padded.len(), 512 + 1024);
        assert_eq!(&padded[..b.len()], &b[..]);
        assert!(padded[b.len()..].iter().all(|&x| x == 0));
        // Whole already, or not a compound file: unchanged, not copied.
        assert!(matches!(
            whole_sectors(&padded),
            std::borrow::Cow::Borrowed(_)
        ));
        assert!(matches!(
            whole_sectors(b"PK\x03\x04 a zip"),
            std::borrow::Cow::Borrowed(_)
        ));
    }

    #[test]
    fn declared_dimensions_as_read() {
        // Rows 0-9 (last row + 1 = 10), columns 0-2: 30 cells.
        let mut d = Vec::new();
        d.extend(0u32.to_le_bytes());
        d.extend(10u32.to_le_bytes());
        d.extend(0u16.to_le_bytes());
        d.extend(3u16.to_le_bytes());
        d.extend(0u16.to_le_bytes());
        assert_eq!(dimensions(&d), Some(30));
        // Last row before the first.
        d[0..4].copy_from_slice(&20u32.to_le_bytes());
        assert_eq!(dimensions(&d), None);
    }

    /// A workbook stream whose directory entry says it holds 0 bytes is
    /// read whole by calamine (its `get_chain` cuts a chain to the length
    /// only when the length is above zero), so the check reads it whole
    /// too: the sheet with huge dimensions is still found. The fixture's
    /// Workbook entry is the second of the directory sector at byte 5120
    /// (its length at byte 120 of the entry).
    #[test]
    fn a_stream_said_to_be_empty_is_checked_whole() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/data/bad/huge_dimensions.xls"
        );
        let mut b = std::fs::read(path).unwrap();
        let entry = 5120 + 128;
        assert_eq!(
            &b[entry..entry + 16],
            "Workbook"
                .encode_utf16()
                .flat_map(u16::to_le_bytes)
                .collect::<Vec<u8>>()
                .as_slice()
        );
        let limits = SheetLimits {
            max_cells: 100_000,
            max_unpacked_bytes: 16 << 20,
        };
        assert!(check_xls(&b, &limits).unwrap_err().contains("dimensions"));
        b[entry + 120..entry + 124].copy_from_slice(&0u32.to_le_bytes());
        // Read whole, from the mini stream (as calamine reads a stream
        // under 4096 bytes): this file has none, so it is refused as
        // damaged rather than passed unread.
        let e = check_xls(&b, &limits).unwrap_err();
        assert!(e.contains("damaged"), "{e}");
    }

    #[test]
    fn other_bytes_pass() {
        let l = SheetLimits::default();
        assert_eq!(check_xls(b"product,month\n", &l), Ok(()));
        assert_eq!(check_xls(&SIGNATURE, &l), Ok(()));
    }
}
