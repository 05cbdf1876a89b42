//! The byte level of reading, streaming one row at a time: file signatures
//! (byte-order marks, spreadsheet files), delimiter detection, CSV records
//! with exact line numbers, and decoding to text (UTF-8, or Latin-1 /
//! Windows-1252 when the user says so).
//!
//! Records are cut by `csv-core` over our own buffer, so that the line of
//! each row is known exactly: blank lines and CRLF line ends are counted
//! here, not guessed.

use std::io::Read;

use sha2::Digest;

/// Longest row accepted, in bytes. A longer row is almost always a quote
/// that is opened and never closed, swallowing the rest of the file; the
/// limit also bounds the memory one row can take.
pub const MAX_ROW_BYTES: usize = 1 << 20;

/// How much of the start of the file may be read to find the header line.
const SNIFF_LIMIT: usize = 1 << 20;
/// Read buffer size.
const CHUNK: usize = 1 << 16;

/// Text encoding of an input file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Encoding {
    /// UTF-8 (the default; a UTF-8 byte-order mark is stripped).
    #[default]
    Utf8,
    /// ISO-8859-1: each byte is the character with the same code point.
    Latin1,
    /// Windows-1252: Latin-1 with printable characters (€, curly quotes,
    /// dashes, Š, Ž, Œ, ...) in bytes 0x80–0x9F.
    Windows1252,
}

impl Encoding {
    /// The name used on the command line and in the manifest.
    pub fn name(self) -> &'static str {
        match self {
            Encoding::Utf8 => "utf-8",
            Encoding::Latin1 => "latin1",
            Encoding::Windows1252 => "windows-1252",
        }
    }
}

/// Windows-1252 characters of bytes 0x80–0x9F (WHATWG Encoding Standard,
/// index-windows-1252). The five bytes the code page leaves undefined map
/// to the control character of the same code point, as WHATWG does.
const CP1252_HIGH: [char; 32] = [
    '\u{20AC}', '\u{0081}', '\u{201A}', '\u{0192}', '\u{201E}', '\u{2026}', '\u{2020}', '\u{2021}',
    '\u{02C6}', '\u{2030}', '\u{0160}', '\u{2039}', '\u{0152}', '\u{008D}', '\u{017D}', '\u{008F}',
    '\u{0090}', '\u{2018}', '\u{2019}', '\u{201C}', '\u{201D}', '\u{2022}', '\u{2013}', '\u{2014}',
    '\u{02DC}', '\u{2122}', '\u{0161}', '\u{203A}', '\u{0153}', '\u{009D}', '\u{017E}', '\u{0178}',
];

/// Decodes one byte of a single-byte encoding.
fn single_byte(b: u8, encoding: Encoding) -> char {
    match (encoding, b) {
        (Encoding::Windows1252, 0x80..=0x9F) => CP1252_HIGH[(b - 0x80) as usize],
        _ => b as char,
    }
}

/// A problem found while reading bytes.
#[derive(Debug)]
pub(crate) enum TextError {
    /// The operating system could not read the file.
    Io(std::io::Error),
    /// The file cannot be read as a CSV (encoding, signature, row too long).
    Input { line: u64, message: String },
}

impl From<std::io::Error> for TextError {
    fn from(e: std::io::Error) -> Self {
        TextError::Io(e)
    }
}

/// Passes bytes through, computing their SHA-256 on the way, so that the
/// manifest's input hash needs no second read and no copy of the file.
pub(crate) struct Hashing<R> {
    inner: R,
    hasher: sha2::Sha256,
}

impl<R: Read> Hashing<R> {
    pub(crate) fn new(inner: R) -> Self {
        Hashing {
            inner,
            hasher: sha2::Sha256::new(),
        }
    }

    /// Lowercase hex SHA-256 of every byte read so far.
    pub(crate) fn hex(&self) -> String {
        self.hasher
            .clone()
            .finalize()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect()
    }
}

impl<R: Read> Read for Hashing<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }
}

/// One decoded row: its fields as text.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Fields<'a> {
    text: &'a str,
    ends: &'a [usize],
}

impl<'a> Fields<'a> {
    /// Number of fields.
    pub(crate) fn len(&self) -> usize {
        self.ends.len()
    }

    /// Field `i`, untrimmed.
    pub(crate) fn get(&self, i: usize) -> Option<&'a str> {
        let end = *self.ends.get(i)?;
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        self.text.get(start..end)
    }

    /// Every field in order.
    pub(crate) fn iter(&self) -> impl Iterator<Item = &'a str> + '_ {
        (0..self.len()).filter_map(move |i| self.get(i))
    }

    /// The row as read, fields joined by `delimiter`; a field holding the
    /// delimiter, a quote or a line break is quoted as the file had it.
    pub(crate) fn joined(&self, delimiter: char) -> String {
        let mut s = String::with_capacity(self.text.len() + self.len());
        for (i, f) in self.iter().enumerate() {
            if i > 0 {
                s.push(delimiter);
            }
            // Quoted again where the file must have quoted it (RFC 4180
            // §2), so the row reads back as the same fields.
            if f.contains([delimiter, '"', '\n', '\r']) {
                s.push('"');
                s.push_str(&f.replace('"', "\"\""));
                s.push('"');
            } else {
                s.push_str(f);
            }
        }
        s
    }
}

/// Streams CSV records from a reader, one at a time.
pub(crate) struct Records<R> {
    input: R,
    encoding: Encoding,
    core: csv_core::Reader,
    buf: Vec<u8>,
    pos: usize,
    len: usize,
    eof: bool,
    /// Line of the next unread byte, 1-based.
    line: u64,
    /// Whether the last byte consumed was a carriage return (so that a
    /// following line feed ends the same line).
    after_cr: bool,
    out: Vec<u8>,
    ends: Vec<usize>,
    text: String,
    text_ends: Vec<usize>,
    /// The delimiter found in the header line.
    pub(crate) delimiter: u8,
    /// Whether a UTF-8 byte-order mark was skipped.
    pub(crate) had_bom: bool,
    /// Whether the record last read is the file's last and a quote opened
    /// in it is never closed (the reader then takes the rest as one value).
    pub(crate) open_quote: bool,
}

impl<R: Read> Records<R> {
    /// Opens a stream: reads as much as needed to see the header line,
    /// checks the file's signature and finds the delimiter.
    pub(crate) fn open(input: R, encoding: Encoding) -> Result<Self, TextError> {
        let mut r = Records {
            input,
            encoding,
            core: csv_core::Reader::new(),
            buf: vec![0; CHUNK],
            pos: 0,
            len: 0,
            eof: false,
            line: 1,
            after_cr: false,
            out: vec![0; 1024],
            ends: vec![0; 32],
            text: String::new(),
            text_ends: Vec::new(),
            delimiter: b',',
            had_bom: false,
            open_quote: false,
        };
        r.sniff()?;
        Ok(r)
    }

    /// Reads more bytes into the buffer (after what is there).
    fn fill(&mut self) -> Result<usize, TextError> {
        if self.eof {
            return Ok(0);
        }
        if self.len == self.buf.len() {
            let grow = self.buf.len().max(CHUNK);
            self.buf.resize(self.buf.len() + grow, 0);
        }
        loop {
            match self.input.read(&mut self.buf[self.len..]) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(0);
                }
                Ok(n) => {
                    self.len += n;
                    return Ok(n);
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(TextError::Io(e)),
            }
        }
    }

    /// Makes unread bytes available; false at the end of the input.
    fn refill(&mut self) -> Result<bool, TextError> {
        if self.pos < self.len {
            return Ok(true);
        }
        self.pos = 0;
        self.len = 0;
        if self.buf.len() > CHUNK {
            self.buf.truncate(CHUNK);
            self.buf.shrink_to_fit();
        }
        Ok(self.fill()? > 0)
    }

    fn sniff(&mut self) -> Result<(), TextError> {
        // Read until a complete non-blank line is in the buffer.
        loop {
            let seen = &self.buf[..self.len];
            let first = seen.iter().position(|b| !b.is_ascii_whitespace());
            let complete = first.is_some_and(|f| seen[f..].contains(&b'\n'));
            if complete || self.len >= SNIFF_LIMIT || self.fill()? == 0 {
                break;
            }
        }
        let head = &self.buf[..self.len];
        let refuse = |message: &str| {
            Err(TextError::Input {
                line: 0,
                message: message.to_string(),
            })
        };
        if head.starts_with(b"\xFF\xFE\x00\x00") || head.starts_with(b"\x00\x00\xFE\xFF") {
            return refuse(
                "the file is UTF-32 text (it starts with a UTF-32 byte-order mark); save it as \"CSV UTF-8\" instead",
            );
        }
        if head.starts_with(b"\xFF\xFE") || head.starts_with(b"\xFE\xFF") {
            return refuse(
                "the file is UTF-16 text (it starts with a UTF-16 byte-order mark), as spreadsheets write \"Unicode text\"; save it as \"CSV UTF-8\" instead",
            );
        }
        if head.starts_with(b"PK\x03\x04") {
            return refuse(
                "the file is a zip archive, probably an .xlsx workbook, not a CSV; give it its .xlsx (or .ods) extension, as provisio reads workbooks by their extension, or save the sheet as \"CSV UTF-8\"",
            );
        }
        if head.starts_with(b"\xD0\xCF\x11\xE0") {
            return refuse(
                "the file is an old-style .xls workbook, not a CSV; give it its .xls extension, as provisio reads workbooks by their extension, or save the sheet as \"CSV UTF-8\"",
            );
        }
        if head.starts_with(b"\xEF\xBB\xBF") {
            self.pos = 3;
            self.had_bom = true;
        }
        let body = &self.buf[self.pos..self.len];
        let header_start = body
            .iter()
            .position(|b| !b.is_ascii_whitespace())
            .unwrap_or(body.len());
        let header_end = body[header_start..]
            .iter()
            .position(|&b| b == b'\n')
            .map_or(body.len(), |e| header_start + e);
        let header = &body[header_start..header_end];
        if header.contains(&0) {
            let line = 1 + body[..header_start].iter().filter(|&&b| b == b'\n').count() as u64;
            return Err(TextError::Input {
                line,
                message: "the file has NUL bytes, so it is not CSV text (UTF-16 without a byte-order mark, or a binary file?); save it as \"CSV UTF-8\"".to_string(),
            });
        }
        self.delimiter = detect_delimiter(header);
        self.core = csv_core::ReaderBuilder::new()
            .delimiter(self.delimiter)
            .build();
        Ok(())
    }

    /// Reads the next record; returns the line it starts on, or `None` at
    /// the end of the file. Blank lines are skipped (and counted).
    pub(crate) fn next_record(&mut self) -> Result<Option<u64>, TextError> {
        loop {
            if !self.refill()? {
                return Ok(None);
            }
            match self.buf[self.pos] {
                b @ (b'\n' | b'\r') => {
                    self.line += line_breaks(&[b], &mut self.after_cr);
                    self.pos += 1;
                }
                _ => break,
            }
        }
        let start = self.line;
        let (mut nout, mut nends, mut taken) = (0usize, 0usize, 0usize);
        let mut quotes = 0usize;
        let mut last_byte = 0u8;
        loop {
            if self.pos == self.len && !self.eof {
                self.refill()?;
                continue;
            }
            let input = &self.buf[self.pos..self.len];
            let (res, nin, o, e) =
                self.core
                    .read_record(input, &mut self.out[nout..], &mut self.ends[nends..]);
            self.line += line_breaks(&input[..nin], &mut self.after_cr);
            quotes += input[..nin].iter().filter(|&&b| b == b'"').count();
            if let Some(&b) = input[..nin].last() {
                last_byte = b;
            }
            self.pos += nin;
            nout += o;
            nends += e;
            taken += nin;
            if taken > MAX_ROW_BYTES {
                let message = if quotes % 2 == 1 {
                    format!(
                        "the row starting here is longer than {} MiB; a quote (\") opened in a field is probably never closed, so the rest of the file reads as one value",
                        MAX_ROW_BYTES >> 20
                    )
                } else {
                    format!(
                        "the row starting here is longer than {} MiB with no quote left open: a line this long is not a data row (a file without line breaks, or not a table?); check that this is the right file",
                        MAX_ROW_BYTES >> 20
                    )
                };
                return Err(TextError::Input {
                    line: start,
                    message,
                });
            }
            match res {
                csv_core::ReadRecordResult::InputEmpty => {
                    if !self.eof {
                        self.refill()?;
                    }
                }
                csv_core::ReadRecordResult::OutputFull => {
                    let n = self.out.len();
                    self.out.resize(n * 2, 0);
                }
                csv_core::ReadRecordResult::OutputEndsFull => {
                    let n = self.ends.len();
                    self.ends.resize(n * 2, 0);
                }
                csv_core::ReadRecordResult::Record => {
                    self.decode(start, nout, nends)?;
                    // An odd number of quotes in the last record, with a line
                    // break taken into a value or no line end at all: the
                    // quote was never closed.
                    let at_end = self.eof && self.pos == self.len;
                    self.open_quote = at_end
                        && quotes % 2 == 1
                        && (self.text.contains(['\n', '\r'])
                            || !matches!(last_byte, b'\n' | b'\r'));
                    return Ok(Some(start));
                }
                csv_core::ReadRecordResult::End => return Ok(None),
            }
        }
    }

    fn decode(&mut self, start: u64, nout: usize, nends: usize) -> Result<(), TextError> {
        self.text.clear();
        self.text_ends.clear();
        let bytes = &self.out[..nout];
        let mut from = 0;
        for &end in &self.ends[..nends] {
            let field = &bytes[from..end];
            match self.encoding {
                Encoding::Utf8 => match std::str::from_utf8(field) {
                    Ok(s) => self.text.push_str(s),
                    Err(e) => {
                        let at = from + e.valid_up_to();
                        let line = start + line_breaks(&bytes[..at], &mut false);
                        return Err(TextError::Input {
                            line,
                            message: format!(
                                "the file is not UTF-8 text (byte 0x{:02X} is not valid UTF-8 here); it is probably a Latin-1 / Windows-1252 export: save it again as \"CSV UTF-8\", or read it with --encoding windows-1252 (or --encoding latin1)",
                                bytes[at]
                            ),
                        });
                    }
                },
                enc => self.text.extend(field.iter().map(|&b| single_byte(b, enc))),
            }
            self.text_ends.push(self.text.len());
            from = end;
        }
        Ok(())
    }

    /// The fields of the record last read.
    pub(crate) fn fields(&self) -> Fields<'_> {
        Fields {
            text: &self.text,
            ends: &self.text_ends,
        }
    }
}

/// Counts line ends in `bytes`: LF, CRLF and a lone CR (old Mac files, and
/// what csv-core also takes as the end of a row) each end one line.
/// `after_cr` carries whether the previous byte was a CR across calls.
fn line_breaks(bytes: &[u8], after_cr: &mut bool) -> u64 {
    let mut n = 0;
    for &b in bytes {
        match b {
            b'\r' => {
                n += 1;
                *after_cr = true;
            }
            b'\n' => {
                if !*after_cr {
                    n += 1;
                }
                *after_cr = false;
            }
            _ => *after_cr = false,
        }
    }
    n
}

/// Picks the delimiter that splits the header line into the most fields,
/// ignoring delimiters inside quotes. Comma wins ties.
fn detect_delimiter(header: &[u8]) -> u8 {
    let mut counts = [(b',', 0usize), (b';', 0), (b'\t', 0)];
    let mut in_quotes = false;
    for &b in header {
        if b == b'"' {
            in_quotes = !in_quotes;
        } else if !in_quotes {
            for c in counts.iter_mut() {
                if c.0 == b {
                    c.1 += 1;
                }
            }
        }
    }
    let mut best = counts[0];
    for c in counts {
        if c.1 > best.1 {
            best = c;
        }
    }
    best.0
}

#[cfg(test)]
mod tests {
    use super::*;

    fn records(bytes: &[u8], encoding: Encoding) -> Result<Vec<(u64, Vec<String>)>, TextError> {
        let mut r = Records::open(bytes, encoding)?;
        let mut out = Vec::new();
        while let Some(line) = r.next_record()? {
            out.push((line, r.fields().iter().map(str::to_string).collect()));
        }
        Ok(out)
    }

    fn lines(bytes: &[u8]) -> Vec<u64> {
        records(bytes, Encoding::Utf8)
            .unwrap()
            .into_iter()
            .map(|r| r.0)
            .collect()
    }

    #[test]
    fn line_numbers_count_blank_lines_crlf_and_quoted_newlines() {
        // The csv crate reports the line where it started looking, which is
        // off by one after a CRLF and at blank lines; these are physical lines.
        assert_eq!(lines(b"h\na\nb\n"), vec![1, 2, 3]);
        assert_eq!(lines(b"h\r\na\r\nb\r\n"), vec![1, 2, 3]);
        assert_eq!(lines(b"h\n\n\na\r\n\r\nb"), vec![1, 4, 6]);
        assert_eq!(lines(b"h\n\"x\ny\",1\nb\n"), vec![1, 2, 4]);
        assert_eq!(lines(b"\n\nh\na"), vec![3, 4]);
        // A lone CR ends a line too, as it ends a row (found by fuzzing:
        // two rows on one "line" broke the row accounting).
        assert_eq!(lines(b"h\ra\rb"), vec![1, 2, 3]);
        assert_eq!(lines(b"h\r\n\ra\n\rb"), vec![1, 3, 5]);
    }

    #[test]
    fn small_chunks_give_the_same_records() {
        // A reader that hands out one byte at a time exercises every refill.
        struct Trickle<'a>(&'a [u8]);
        impl Read for Trickle<'_> {
            fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
                if self.0.is_empty() || buf.is_empty() {
                    return Ok(0);
                }
                buf[0] = self.0[0];
                self.0 = &self.0[1..];
                Ok(1)
            }
        }
        let data = b"a;b\r\n\"x;\"\"y\"\"\nz\";2\r\n\r\nlast;3";
        let mut r = Records::open(Trickle(data), Encoding::Utf8).unwrap();
        let mut got = Vec::new();
        while let Some(line) = r.next_record().unwrap() {
            got.push((line, r.fields().iter().collect::<Vec<_>>().join("|")));
        }
        assert_eq!(
            got,
            vec![
                (1, "a|b".to_string()),
                (2, "x;\"y\"\nz|2".to_string()),
                (5, "last|3".to_string())
            ]
        );
        // The row as the file held it: the field with a quote and a line
        // break quoted again, its quotes doubled (RFC 4180 §2).
        let mut r = Records::open(Trickle(data), Encoding::Utf8).unwrap();
        r.next_record().unwrap();
        r.next_record().unwrap();
        assert_eq!(r.fields().joined(';'), "\"x;\"\"y\"\"\nz\";2");
    }

    #[test]
    fn windows_1252_and_latin1() {
        // Reference: Python 3.11.7 bytes.decode("cp1252") / ("latin-1") on the
        // same bytes: b"\x80\x93\xe9\x9f" -> "€“éŸ" and "\x80\x93é\x9f".
        let r = records(b"n\n\x80\x93\xe9\x9f\n", Encoding::Windows1252).unwrap();
        assert_eq!(r[1].1[0], "€“éŸ");
        let r = records(b"n\n\x80\x93\xe9\x9f\n", Encoding::Latin1).unwrap();
        assert_eq!(r[1].1[0], "\u{80}\u{93}é\u{9f}");
    }

    #[test]
    fn cp1252_table_matches_python() {
        // Python 3.11.7: "".join(bytes([b]).decode("cp1252", "ignore") for b in range(0x80, 0xA0));
        // the five undefined bytes give "" there and map to U+0081 etc. here (WHATWG).
        let python = "€‚ƒ„…†‡ˆ‰Š‹ŒŽ‘’“”•–—˜™š›œžŸ";
        let ours: String = (0x80u8..0xA0)
            .filter(|b| ![0x81, 0x8D, 0x8F, 0x90, 0x9D].contains(b))
            .map(|b| single_byte(b, Encoding::Windows1252))
            .collect();
        assert_eq!(ours, python);
    }

    #[test]
    fn invalid_utf8_names_the_physical_line() {
        let e = records(b"n,m\n\"a\nb\xE9\",1\n", Encoding::Utf8).unwrap_err();
        match e {
            TextError::Input { line, message } => {
                assert_eq!(line, 3);
                assert!(message.contains("0xE9"), "{message}");
            }
            TextError::Io(e) => panic!("{e}"),
        }
    }

    #[test]
    fn signatures_are_refused() {
        for (bytes, word) in [
            (&b"\xFF\xFEp\0r\0"[..], "UTF-16"),
            (&b"PK\x03\x04rest"[..], "xlsx"),
            (&b"\xD0\xCF\x11\xE0rest"[..], ".xls"),
            (&b"p\0r\0o\0\n\0"[..], "NUL"),
        ] {
            match records(bytes, Encoding::Utf8) {
                Err(TextError::Input { message, .. }) => {
                    assert!(message.contains(word), "{message}")
                }
                other => panic!("{word}: {other:?}"),
            }
        }
    }

    #[test]
    fn utf32_is_named_utf32_not_utf16() {
        // The UTF-32 little-endian byte-order mark FF FE 00 00 begins with
        // UTF-16's FF FE (Unicode Standard, section 23.8).
        let bytes = b"\xFF\xFE\x00\x00p\x00\x00\x00";
        match Records::open(&bytes[..], Encoding::Utf8) {
            Err(TextError::Input { message, .. }) => {
                assert!(message.contains("UTF-32"), "{message}")
            }
            _ => panic!("UTF-32 accepted"),
        }
    }

    #[test]
    fn an_unclosed_quote_is_refused_at_the_row_limit() {
        let mut data = b"p,m\n\"never closed,1\n".to_vec();
        data.extend(vec![b'x'; MAX_ROW_BYTES + 10]);
        match records(&data, Encoding::Utf8) {
            Err(TextError::Input { line, message }) => {
                assert_eq!(line, 2);
                assert!(message.contains("never closed"), "{message}");
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn a_long_row_without_a_quote_is_not_blamed_on_a_quote() {
        let mut data = b"p,m\nORS,".to_vec();
        data.extend(vec![b'7'; MAX_ROW_BYTES + 10]);
        data.extend(b"\nORS,1\n");
        match records(&data, Encoding::Utf8) {
            Err(TextError::Input { line, message }) => {
                assert_eq!(line, 2);
                assert!(message.contains("no quote left open"), "{message}");
                assert!(!message.contains("never closed"), "{message}");
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn hashing_matches_known_value() {
        // FIPS 180-2 example: SHA-256("abc").
        let mut h = Hashing::new(&b"abc"[..]);
        std::io::copy(&mut h, &mut std::io::sink()).unwrap();
        assert_eq!(
            h.hex(),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}

/// Bytes with Windows line ends (CR LF) turned into LF, borrowed when there
/// are none. The `csv` crate does not count the line end of a CR LF pair in
/// its record positions, so a reader that takes line numbers from them
/// would name a line one too low for each line before it; spreadsheets on
/// Windows save CSV with CR LF.
pub fn lf_line_ends(bytes: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    if !bytes.windows(2).any(|w| w == b"\r\n") {
        return std::borrow::Cow::Borrowed(bytes);
    }
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'\r' && bytes.get(i + 1) == Some(&b'\n') {
            i += 1;
            continue;
        }
        out.push(bytes[i]);
        i += 1;
    }
    std::borrow::Cow::Owned(out)
}

#[cfg(test)]
mod line_end_tests {
    use super::lf_line_ends;

    #[test]
    fn windows_line_ends_become_unix_ones_and_lone_returns_stay() {
        assert_eq!(&*lf_line_ends(b"a,b\r\n1,2\r\n"), b"a,b\n1,2\n");
        assert_eq!(&*lf_line_ends(b"a\rb\n"), b"a\rb\n");
        assert!(matches!(
            lf_line_ends(b"a\nb\n"),
            std::borrow::Cow::Borrowed(_)
        ));
        // The csv crate's line of the third record, with CR LF as given and
        // after the change (the reason for this function).
        let line = |bytes: &[u8]| {
            let mut r = csv::Reader::from_reader(bytes);
            r.records()
                .nth(1)
                .unwrap()
                .unwrap()
                .position()
                .unwrap()
                .line()
        };
        assert_eq!(line(b"h\r\n1\r\n2\r\n"), 2);
        assert_eq!(line(&lf_line_ends(b"h\r\n1\r\n2\r\n")), 3);
    }
}

/// Longest value a small side table (stock, changes, services, population)
/// takes, in bytes: a note may be long, but a value this long is almost
/// always a quote opened and never closed, swallowing the rows after it.
pub const MAX_SIDE_VALUE_BYTES: usize = 4096;

/// Most line breaks inside one quoted value of a side table (a spreadsheet
/// cell may hold a few).
pub const MAX_SIDE_VALUE_BREAKS: usize = 20;

/// Why a side table's row starting at `line` cannot be trusted, when one of
/// its values looks like a quote opened and never closed: a header name
/// holding a line break, or a value longer than `MAX_SIDE_VALUE_BYTES` (4096) or
/// with more than `MAX_SIDE_VALUE_BREAKS` (20) line breaks. The message names
/// the line the quote opens on and the column (1-based), never the value
/// itself, which may be the rest of the file.
pub fn runaway_quote<'a>(
    line: u64,
    header: bool,
    fields: impl IntoIterator<Item = &'a str>,
) -> Option<String> {
    fields.into_iter().enumerate().find_map(|(i, v)| {
        let breaks = v.bytes().filter(|&b| b == b'\n').count();
        let bad = (header && breaks > 0)
            || v.len() > MAX_SIDE_VALUE_BYTES
            || breaks > MAX_SIDE_VALUE_BREAKS;
        bad.then(|| {
            let limit = if header {
                "a column name holds no line break".to_string()
            } else {
                format!("a value holds at most {MAX_SIDE_VALUE_BYTES} bytes and {MAX_SIDE_VALUE_BREAKS} line breaks")
            };
            format!(
                "column {} of the {} starting on line {line} runs over {} lines ({} bytes): a quote opened there is probably never closed; close it or remove the stray quote mark ({limit})",
                i + 1,
                if header { "header" } else { "row" },
                breaks + 1,
                v.len(),
            )
        })
    })
}
