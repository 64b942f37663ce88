//! Streaming readers and writers for bit files.
//!
//! [`BlockReader`] yields consecutive n-bit blocks from any [`Read`] without
//! holding more than a block and one read buffer in memory; [`BitWriter`]
//! appends bit strings of any length to a [`Write`], packing across byte
//! boundaries. Both speak the three formats of [`Format`].

use super::{
    copy_bits, hex_value, pack_bytes_into_words, words_for, BitOrder, Bits, Error, ErrorKind,
    Format,
};
use std::fs::File;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

const READ_CHUNK: usize = 1 << 16;

/// Opens `path` for reading; `-` is standard input.
pub fn open_input(path: &Path) -> Result<Box<dyn Read + Send>, Error> {
    if path.as_os_str() == "-" {
        Ok(Box::new(std::io::stdin()))
    } else {
        let f = File::open(path).map_err(|e| Error::from(e).in_file(path))?;
        Ok(Box::new(f))
    }
}

/// The most bits a regular file of `format` can hold, from its size
/// (packed: 8 per byte, hex: 4, ASCII: 1); `None` for standard input or
/// anything whose size is unknown.
pub fn max_bits_in(path: &Path, format: Format) -> Option<u64> {
    if path.as_os_str() == "-" {
        return None;
    }
    let md = std::fs::metadata(path).ok()?;
    if !md.is_file() {
        return None;
    }
    let per_byte = match format {
        Format::Packed => 8,
        Format::Hex => 4,
        Format::Ascii => 1,
    };
    Some(md.len().saturating_mul(per_byte))
}

/// Reads a whole bit file (or its first `limit` bits). A limit the file
/// cannot hold is refused before anything is allocated.
pub fn read_bits(
    path: &Path,
    format: Format,
    order: BitOrder,
    limit: Option<usize>,
) -> Result<Bits, Error> {
    if let (Some(n), Some(max)) = (limit, max_bits_in(path, format)) {
        if n as u64 > max {
            return Err(Error::new(ErrorKind::TooShort {
                wanted: n as u64,
                available: max,
            })
            .in_file(path));
        }
    }
    let r = open_input(path)?;
    let mut reader = BlockReader::new(r, path, format, order);
    let mut out = Bits::new();
    match limit {
        Some(n) => {
            out.resize(n);
            if !reader.next_block(&mut out)? {
                return Err(Error::new(ErrorKind::TooShort {
                    wanted: n as u64,
                    available: reader.bits_available(),
                })
                .at_offset(reader.bytes_read())
                .in_file(path));
            }
        }
        None => reader.read_to_end(&mut out)?,
    }
    Ok(out)
}

/// Yields consecutive blocks of bits from a reader.
pub struct BlockReader<R> {
    inner: R,
    path: PathBuf,
    format: Format,
    order: BitOrder,
    /// Decoded bits not yet handed out, from bit `pos` of `queue` to `qlen`.
    queue: Vec<u64>,
    pos: usize,
    qlen: usize,
    buf: Vec<u8>,
    bytes_read: u64,
    bits_out: u64,
    eof: bool,
    /// A hex digit waiting for its partner, with its offset.
    hex_pending: Option<(u8, u64)>,
}

impl<R: Read> BlockReader<R> {
    /// A reader over `inner`; `path` is only used in error messages.
    pub fn new(inner: R, path: &Path, format: Format, order: BitOrder) -> Self {
        BlockReader {
            inner,
            path: path.to_path_buf(),
            format,
            order,
            queue: Vec::new(),
            pos: 0,
            qlen: 0,
            buf: vec![0; READ_CHUNK],
            bytes_read: 0,
            bits_out: 0,
            eof: false,
            hex_pending: None,
        }
    }

    /// Bytes read from the underlying reader so far.
    pub fn bytes_read(&self) -> u64 {
        self.bytes_read
    }

    /// Bits handed out in blocks so far.
    pub fn bits_consumed(&self) -> u64 {
        self.bits_out
    }

    /// Bits decoded so far (handed out or waiting).
    pub fn bits_available(&self) -> u64 {
        self.bits_out + (self.qlen - self.pos) as u64
    }

    /// Fills `out` (its current length is the block size) with the next
    /// bits. Returns `false`, leaving the pending bits in the reader, when the
    /// input ends before a full block.
    pub fn next_block(&mut self, out: &mut Bits) -> Result<bool, Error> {
        let n = out.len();
        while self.qlen - self.pos < n {
            if self.eof || !self.fill()? {
                return Ok(false);
            }
        }
        out.words_mut().fill(0);
        copy_bits(&self.queue, self.pos, out.words_mut(), 0, n);
        out.clear_tail();
        self.pos += n;
        self.bits_out += n as u64;
        Ok(true)
    }

    /// Number of bits left after the last full block (call after
    /// [`next_block`](Self::next_block) returned `false`).
    pub fn remainder_bits(&self) -> usize {
        self.qlen - self.pos
    }

    /// Reads everything that is left into `out` (replacing its contents).
    pub fn read_to_end(&mut self, out: &mut Bits) -> Result<(), Error> {
        while !self.eof && self.fill()? {}
        let n = self.qlen - self.pos;
        out.resize(0);
        out.resize(n);
        copy_bits(&self.queue, self.pos, out.words_mut(), 0, n);
        out.clear_tail();
        self.pos += n;
        self.bits_out += n as u64;
        Ok(())
    }

    /// Reads one chunk and decodes it; returns whether anything was read.
    fn fill(&mut self) -> Result<bool, Error> {
        // Drop consumed words so the queue stays small.
        let drop = self.pos / 64;
        if drop > 0 {
            self.queue.drain(..drop);
            self.pos -= drop * 64;
            self.qlen -= drop * 64;
        }
        let got = loop {
            match self.inner.read(&mut self.buf) {
                Ok(k) => break k,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    return Err(Error::from(e)
                        .at_offset(self.bytes_read)
                        .in_file(&self.path))
                }
            }
        };
        if got == 0 {
            self.eof = true;
            if let Some((_, off)) = self.hex_pending {
                return Err(Error::new(ErrorKind::OddHexDigits)
                    .at_offset(off)
                    .in_file(&self.path));
            }
            return Ok(false);
        }
        let base = self.bytes_read;
        self.bytes_read += got as u64;
        let chunk = std::mem::take(&mut self.buf);
        let r = self.decode(&chunk[..got], base);
        self.buf = chunk;
        r?;
        Ok(true)
    }

    fn decode(&mut self, data: &[u8], base: u64) -> Result<(), Error> {
        match self.format {
            Format::Packed => {
                self.push_bytes(data);
                Ok(())
            }
            Format::Ascii => {
                self.queue.reserve(words_for(data.len()) + 1);
                for (i, &c) in data.iter().enumerate() {
                    let bit = match c {
                        b'0' => 0u64,
                        b'1' => 1u64,
                        c if c.is_ascii_whitespace() => continue,
                        c => {
                            return Err(Error::new(ErrorKind::BadChar {
                                found: c,
                                expected: "'0' or '1'",
                            })
                            .at_offset(base + i as u64)
                            .in_file(&self.path))
                        }
                    };
                    if self.qlen.is_multiple_of(64) {
                        self.queue.push(0);
                    }
                    self.queue[self.qlen / 64] |= bit << (self.qlen % 64);
                    self.qlen += 1;
                }
                Ok(())
            }
            Format::Hex => {
                let mut bytes = Vec::with_capacity(data.len() / 2 + 1);
                for (i, &c) in data.iter().enumerate() {
                    if c.is_ascii_whitespace() {
                        continue;
                    }
                    let off = base + i as u64;
                    let v = hex_value(c).ok_or_else(|| {
                        Error::new(ErrorKind::BadChar {
                            found: c,
                            expected: "a hexadecimal digit",
                        })
                        .at_offset(off)
                        .in_file(&self.path)
                    })?;
                    self.hex_pending = match self.hex_pending {
                        None => Some((v, off)),
                        Some((hi, _)) => {
                            bytes.push(hi << 4 | v);
                            None
                        }
                    };
                }
                self.push_bytes(&bytes);
                Ok(())
            }
        }
    }

    /// Appends packed bytes (the queue length is always a multiple of 8 here).
    fn push_bytes(&mut self, data: &[u8]) {
        debug_assert_eq!(self.qlen % 8, 0);
        let new_len = self.qlen + data.len() * 8;
        self.queue.resize(words_for(new_len), 0);
        let mut data = data;
        // Fill the partial word byte by byte, then whole words at once.
        while !self.qlen.is_multiple_of(64) && !data.is_empty() {
            let b = match self.order {
                BitOrder::Msb => data[0].reverse_bits(),
                BitOrder::Lsb => data[0],
            };
            self.queue[self.qlen / 64] |= (b as u64) << (self.qlen % 64);
            self.qlen += 8;
            data = &data[1..];
        }
        if !data.is_empty() {
            let w0 = self.qlen / 64;
            let nw = words_for(data.len() * 8);
            pack_bytes_into_words(data, self.order, &mut self.queue[w0..w0 + nw]);
            self.qlen += data.len() * 8;
        }
    }
}

/// Writes bit strings one after another, packing across byte boundaries.
pub struct BitWriter<W: Write> {
    inner: W,
    format: Format,
    order: BitOrder,
    /// Bits not yet written (fewer than 8 between calls for packed/hex).
    pending: Bits,
    out: Vec<u8>,
    bits_written: u64,
}

impl<W: Write> BitWriter<W> {
    /// A writer in the given format.
    pub fn new(inner: W, format: Format, order: BitOrder) -> Self {
        BitWriter {
            inner,
            format,
            order,
            pending: Bits::new(),
            out: Vec::new(),
            bits_written: 0,
        }
    }

    /// Bits accepted so far.
    pub fn bits_written(&self) -> u64 {
        self.bits_written
    }

    /// Appends `bits`.
    pub fn write_bits(&mut self, bits: &Bits) -> std::io::Result<()> {
        self.bits_written += bits.len() as u64;
        match self.format {
            Format::Ascii => {
                self.out.clear();
                self.out
                    .extend(bits.iter().map(|b| if b { b'1' } else { b'0' }));
                self.inner.write_all(&self.out)
            }
            Format::Packed | Format::Hex => {
                if self.pending.is_empty() && bits.len().is_multiple_of(8) {
                    let packed = bits.to_packed(self.order);
                    return self.emit(&packed);
                }
                self.pending.extend_from(bits);
                let whole = self.pending.len() / 8 * 8;
                if whole > 0 {
                    let mut packed = self.pending.to_packed(self.order);
                    packed.truncate(whole / 8);
                    self.emit(&packed)?;
                    let rest = self.pending.len() - whole;
                    self.pending = self.pending.slice(whole, rest);
                }
                Ok(())
            }
        }
    }

    fn emit(&mut self, packed: &[u8]) -> std::io::Result<()> {
        match self.format {
            Format::Hex => self.inner.write_all(hex::encode(packed).as_bytes()),
            _ => self.inner.write_all(packed),
        }
    }

    /// Writes any pending bits (padded with zero bits to a whole byte), a
    /// final newline for text formats, flushes, and returns the inner writer.
    pub fn finish(mut self) -> std::io::Result<W> {
        if !self.pending.is_empty() {
            let packed = self.pending.to_packed(self.order);
            self.emit(&packed)?;
        }
        if matches!(self.format, Format::Ascii | Format::Hex) {
            self.inner.write_all(b"\n")?;
        }
        self.inner.flush()?;
        Ok(self.inner)
    }
}

/// Bytes a [`PackedFileSource`] reads at once (its buffer holds no more).
pub const SOURCE_PIECE_BYTES: usize = 1 << 18;

/// A packed bit file read by ranges (positioned reads, no seeking state):
/// the [`super::source::BitSource`] of a whole-run hash's input or seed
/// when it is not held in memory.
pub struct PackedFileSource {
    file: File,
    path: PathBuf,
    bits: u64,
    order: BitOrder,
    bytes: Vec<u8>,
}

impl PackedFileSource {
    /// The first `bits` bits of the packed file at `path` (refused when the
    /// file is shorter).
    pub fn open(path: &Path, bits: u64, order: BitOrder) -> Result<Self, Error> {
        let file = File::open(path).map_err(|e| Error::from(e).in_file(path))?;
        let len = file
            .metadata()
            .map_err(|e| Error::from(e).in_file(path))?
            .len();
        if len.saturating_mul(8) < bits {
            return Err(Error::new(ErrorKind::TooShort {
                wanted: bits,
                available: len * 8,
            })
            .in_file(path));
        }
        Ok(PackedFileSource {
            file,
            path: path.to_path_buf(),
            bits,
            order,
            bytes: Vec::new(),
        })
    }
}

impl super::source::BitSource for PackedFileSource {
    fn bits(&self) -> u64 {
        self.bits
    }

    fn read_words(&mut self, first: u64, out: &mut [u64]) -> std::io::Result<()> {
        out.fill(0);
        let total = self.bits.div_ceil(8);
        let start = first.saturating_mul(8);
        if start >= total {
            return Ok(());
        }
        let k = ((total - start) as usize).min(8 * out.len());
        // In pieces of at most SOURCE_PIECE_BYTES (whole words), so the
        // byte buffer stays small however long the read.
        let mut done = 0usize;
        while done < k {
            let take = (k - done).min(SOURCE_PIECE_BYTES);
            let at = start + done as u64;
            self.bytes.clear();
            self.bytes.resize(take, 0);
            read_exact_at(&self.file, &mut self.bytes, at).map_err(|e| {
                std::io::Error::new(e.kind(), format!("{}: byte {at}: {e}", self.path.display()))
            })?;
            let w0 = done / 8;
            pack_bytes_into_words(
                &self.bytes,
                self.order,
                &mut out[w0..w0 + words_for(take * 8)],
            );
            done += take;
        }
        // Bits at or beyond the length read as zero.
        let end_bit = self.bits.saturating_sub(64 * first);
        if end_bit < 64 * out.len() as u64 {
            let w = (end_bit / 64) as usize;
            let r = end_bit % 64;
            if r != 0 {
                out[w] &= (1u64 << r) - 1;
                out[w + 1..].fill(0);
            } else {
                out[w..].fill(0);
            }
        }
        Ok(())
    }
}

#[cfg(unix)]
fn read_exact_at(f: &File, buf: &mut [u8], offset: u64) -> std::io::Result<()> {
    std::os::unix::fs::FileExt::read_exact_at(f, buf, offset)
}

#[cfg(not(unix))]
fn read_exact_at(f: &File, buf: &mut [u8], offset: u64) -> std::io::Result<()> {
    use std::io::Seek;
    let mut f = f;
    f.seek(std::io::SeekFrom::Start(offset))?;
    f.read_exact(buf)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(n: usize) -> Bits {
        Bits::from_bools(&(0..n).map(|i| (i * i + 3 * i) % 7 < 3).collect::<Vec<_>>())
    }

    /// Positioned reads of a packed file against slices of the string it
    /// holds (both bit orders, lengths not multiples of 8 or 64, ranges
    /// reaching past the end).
    #[test]
    fn packed_file_ranges_match_slices() {
        use super::super::source::{read_virtual, BitSource};
        let all = sample(10_007);
        for order in [BitOrder::Msb, BitOrder::Lsb] {
            let f = tempfile::NamedTempFile::new().unwrap();
            std::fs::write(f.path(), all.to_packed(order)).unwrap();
            for bits in [10_007u64, 9_999, 64, 1] {
                let mut src = PackedFileSource::open(f.path(), bits, order).unwrap();
                assert_eq!(src.bits(), bits);
                let mut tmp = Vec::new();
                for (start, len) in [
                    (0i64, 10_007usize),
                    (5, 333),
                    (-70, 200),
                    (9_990, 100),
                    (64, 64),
                ] {
                    let mut out = vec![0u64; words_for(len)];
                    read_virtual(&mut src, 0, start, len, &mut out, &mut tmp).unwrap();
                    for i in 0..len {
                        let j = start + i as i64;
                        let want = j >= 0 && (j as u64) < bits && all.get(j as usize);
                        assert_eq!(
                            (out[i / 64] >> (i % 64)) & 1 == 1,
                            want,
                            "{order:?} bits={bits} start={start} bit {i}"
                        );
                    }
                }
            }
            assert!(PackedFileSource::open(f.path(), 10_008 + 8, order).is_err());
        }
    }

    #[test]
    fn blocks_of_odd_sizes_follow_the_stream() {
        let all = sample(10_000);
        for format in [Format::Packed, Format::Ascii, Format::Hex] {
            for order in [BitOrder::Msb, BitOrder::Lsb] {
                let mut w = BitWriter::new(Vec::new(), format, order);
                w.write_bits(&all).unwrap();
                let bytes = w.finish().unwrap();
                for block in [1usize, 7, 64, 65, 999, 10_000] {
                    let mut r = BlockReader::new(&bytes[..], Path::new("t"), format, order);
                    let mut b = Bits::zeros(block);
                    let mut at = 0;
                    while r.next_block(&mut b).unwrap() {
                        assert_eq!(b, all.slice(at, block), "{format:?} {order:?} {block}");
                        at += block;
                    }
                    // packed and hex files carry no pad bits here (10000 = 8 * 1250)
                    assert_eq!(at + r.remainder_bits(), 10_000);
                }
            }
        }
    }

    #[test]
    fn writer_concatenates_across_bytes() {
        let parts = [sample(3), sample(13), sample(64), sample(1)];
        let mut all = Bits::new();
        let mut w = BitWriter::new(Vec::new(), Format::Packed, BitOrder::Msb);
        for p in &parts {
            w.write_bits(p).unwrap();
            all.extend_from(p);
        }
        let bytes = w.finish().unwrap();
        assert_eq!(bytes, all.to_packed(BitOrder::Msb));
    }

    #[test]
    fn stream_errors_carry_offsets() {
        let data = b"0101\n01z1";
        let mut r = BlockReader::new(
            &data[..],
            Path::new("raw.txt"),
            Format::Ascii,
            BitOrder::Msb,
        );
        let mut b = Bits::zeros(8);
        let e = r.next_block(&mut b).unwrap_err();
        assert_eq!(e.offset(), Some(7));
        assert!(
            e.to_string().starts_with("raw.txt: byte 7: found 'z'"),
            "{e}"
        );
        let mut r = BlockReader::new(&b"abc"[..], Path::new("h"), Format::Hex, BitOrder::Msb);
        let mut b = Bits::zeros(16);
        let e = r.next_block(&mut b).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::OddHexDigits));
        assert_eq!(e.offset(), Some(2));
    }
}
