//! A long listing written in an order known only at its end (`pim study`'s worst
//! receivers first), its pieces spilled to a temporary file.

use std::io::Write;

/// Rendered pieces of output set aside in an unnamed temporary file (removed by the
/// system when closed), with their sort keys in memory: a long listing written in an
/// order known only at its end, holding one piece at a time.
pub struct Spill<K: Ord> {
    file: std::fs::File,
    end: u64,
    entries: Vec<(K, u64, u64)>,
}

impl<K: Ord> Spill<K> {
    pub fn new() -> std::io::Result<Self> {
        Ok(Spill {
            file: tempfile::tempfile()?,
            end: 0,
            entries: Vec::new(),
        })
    }

    /// Sets one piece aside under its sort key.
    pub fn put(&mut self, key: K, bytes: &[u8]) -> std::io::Result<()> {
        self.file.write_all(bytes)?;
        self.entries.push((key, self.end, bytes.len() as u64));
        self.end += bytes.len() as u64;
        Ok(())
    }

    /// Writes the pieces by their keys (ties in the order put); JSON objects separated by
    /// commas.
    pub fn write_sorted(mut self, out: &mut dyn Write, json: bool) -> std::io::Result<()> {
        use std::io::{Read, Seek, SeekFrom};
        self.entries.sort_by(|a, b| a.0.cmp(&b.0));
        let mut buf = Vec::new();
        for (pos, (_, at, len)) in self.entries.iter().enumerate() {
            if json && pos > 0 {
                writeln!(out, ",")?;
            }
            self.file.seek(SeekFrom::Start(*at))?;
            buf.clear();
            (&mut self.file).take(*len).read_to_end(&mut buf)?;
            out.write_all(&buf)?;
            out.flush()?;
        }
        Ok(())
    }
}
