"""Writes the hostile old-style workbooks of tests/data/bad/ (catalogued in
its README, checked by tests/cli_hostile.rs). Each is the committed
tests/data/sheets/xlwt.xls (made by xlwt, see workbook_xlwt.py) with a few
bytes changed, so each holds exactly the problem it is named for. Plain
Python; the compound-file layout is read as Microsoft's [MS-CFB]
specification describes it, the records as [MS-XLS] (BIFF8) does. The
product and numbers are invented test data.

    python3 tests/reference/bad_xls.py

Files:
  far_cell.xls         the last cell moved to row 65536, column 65536
                       (the largest position a record can hold): the
                       sheet's cells span 4,294,967,296 cells
  huge_dimensions.xls  the sheet's DIMENSIONS record declares rows 1 to
                       2,147,483,647
  bad_sector.xls       the header's first directory sector is 2,147,483,632,
                       far past the end of the 5.5 KB file
  cut_directory.xls    huge_dimensions.xls cut inside its directory sector
                       (the file's last), just after the Workbook entry's
                       start and length: the entry is cut short, and a
                       reader that skips a short entry sees no workbook
"""

import pathlib
import struct

ROOT = pathlib.Path(__file__).resolve().parents[1]
SOURCE = ROOT / "data" / "sheets" / "xlwt.xls"
OUT = ROOT / "data" / "bad"

END_OF_CHAIN = 0xFFFFFFFE


def sectors_of(data):
    size = 1 << struct.unpack_from("<H", data, 30)[0]
    return size, lambda i: (i + 1) * size


def fat_of(data):
    size, offset = sectors_of(data)
    difat = struct.unpack_from("<109I", data, 76)
    fat = []
    for s in difat:
        if s >= 0xFFFFFFFC:
            continue
        fat.extend(struct.unpack_from("<%dI" % (size // 4), data, offset(s)))
    return fat


def chain(fat, start):
    out = []
    while start != END_OF_CHAIN:
        out.append(start)
        start = fat[start]
    return out


def workbook_offsets(data):
    """File offsets of each byte of the Workbook stream (it is at least
    4096 bytes in the xlwt file, so it lives in regular sectors)."""
    size, offset = sectors_of(data)
    fat = fat_of(data)
    dir_start = struct.unpack_from("<I", data, 48)[0]
    for s in chain(fat, dir_start):
        for k in range(size // 128):
            e = offset(s) + k * 128
            name_len = struct.unpack_from("<H", data, e + 64)[0]
            name = data[e : e + max(name_len - 2, 0)].decode("utf-16-le")
            if name == "Workbook":
                start, length = struct.unpack_from("<II", data, e + 116)
                assert length >= 4096, "expected the stream in regular sectors"
                offs = []
                for sec in chain(fat, start):
                    offs.extend(range(offset(sec), offset(sec) + size))
                return offs[:length]
    raise SystemExit("no Workbook stream")


def records(data, offs):
    """(type, file offsets of the record's data) for each record."""
    stream = bytes(data[o] for o in offs)
    pos = 0
    while pos + 4 <= len(stream):
        typ, length = struct.unpack_from("<HH", stream, pos)
        yield typ, offs[pos + 4 : pos + 4 + length]
        pos += 4 + length


def put(data, offs, fmt, *values):
    raw = struct.pack(fmt, *values)
    for o, b in zip(offs, raw):
        data[o] = b


def main():
    source = SOURCE.read_bytes()

    data = bytearray(source)
    offs = workbook_offsets(data)
    # Number, RK or LabelSst: records of one cell, row and column first.
    cells = [o for t, o in records(data, offs) if t in (0x0203, 0x027E, 0x00FD)]
    put(data, cells[-1][:4], "<HH", 0xFFFF, 0xFFFF)
    (OUT / "far_cell.xls").write_bytes(data)

    data = bytearray(source)
    offs = workbook_offsets(data)
    dims = [o for t, o in records(data, offs) if t == 0x0200]
    assert len(dims[0]) == 14
    put(data, dims[0][:8], "<II", 0, 0x7FFFFFFF)
    (OUT / "huge_dimensions.xls").write_bytes(data)

    size, offset = sectors_of(data)
    dirs = chain(fat_of(data), struct.unpack_from("<I", data, 48)[0])
    assert offset(dirs[-1]) + size == len(data), "the directory's sector ends the file"
    for k in range(size // 128):
        e = offset(dirs[-1]) + k * 128
        name_len = struct.unpack_from("<H", data, e + 64)[0]
        if data[e : e + max(name_len - 2, 0)].decode("utf-16-le") == "Workbook":
            # Name, kind, start (116..120) and length (120..124) kept.
            (OUT / "cut_directory.xls").write_bytes(data[: e + 125])
            break
    else:
        raise SystemExit("no Workbook entry in the last directory sector")

    data = bytearray(source)
    struct.pack_into("<I", data, 48, 0x7FFFFFF0)
    (OUT / "bad_sector.xls").write_bytes(data)


if __name__ == "__main__":
    main()
