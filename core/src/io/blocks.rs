//! Text read in blocks of whole lines, and a block cut into chunks at line ends so the chunks
//! can be parsed in parallel and joined in file order.

use std::io::Read;

/// Append up to `want` bytes from `file` to `buf` (into its spare capacity, without filling it
/// with zeros first); true at end of file.
pub(crate) fn fill(file: &mut impl Read, buf: &mut Vec<u8>, want: usize) -> std::io::Result<bool> {
    let got = file.take(want as u64).read_to_end(buf)?;
    Ok(got < want)
}

/// Where `block` (whole lines; the last may lack its line end) is cut into at most `n` chunks
/// of about equal size: the chunk starts in order, each just after a `\n`, then `block.len()`.
/// The first entry is 0; chunks are never empty unless the block is, and a chunk never ends
/// inside a line, so a `\r\n` pair stays in one chunk.
pub(crate) fn chunk_bounds(block: &[u8], n: usize) -> Vec<usize> {
    let len = block.len();
    let mut bounds = vec![0];
    for k in 1..n.max(1) {
        let last = bounds[bounds.len() - 1];
        let from = (len / n * k).max(last);
        match memchr::memchr(b'\n', &block[from..]) {
            Some(i) if from + i + 1 < len => bounds.push(from + i + 1),
            _ => break,
        }
    }
    bounds.push(len);
    bounds
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chunks(text: &[u8], n: usize) -> Vec<&[u8]> {
        chunk_bounds(text, n)
            .windows(2)
            .map(|w| &text[w[0]..w[1]])
            .collect()
    }

    #[test]
    fn chunks_are_whole_lines_in_order() {
        let text = b"a,1\r\nbb,2\r\nccc,3\r\n\r\n# note\r\nd,4";
        for n in 1..20 {
            let c = chunks(text, n);
            assert!(c.len() <= n.max(1), "{n}: {c:?}");
            assert_eq!(c.concat(), text.to_vec(), "{n}");
            for (k, chunk) in c.iter().enumerate() {
                assert!(!chunk.is_empty(), "{n}: empty chunk {k}");
                if k + 1 < c.len() {
                    assert!(chunk.ends_with(b"\r\n"), "{n}: {chunk:?}");
                }
            }
        }
    }

    #[test]
    fn empty_block_and_a_single_line() {
        assert_eq!(chunk_bounds(b"", 4), vec![0, 0]);
        assert_eq!(chunk_bounds(b"1,2,3", 4), vec![0, 5]);
        assert_eq!(chunk_bounds(b"1,2,3\n", 4), vec![0, 6]);
    }

    #[test]
    fn many_lines_give_the_chunks_asked_for() {
        let text: Vec<u8> = (0..1000)
            .flat_map(|i| format!("{i},{i}\n").into_bytes())
            .collect();
        let c = chunks(&text, 8);
        assert_eq!(c.len(), 8);
        let longest = c.iter().map(|c| c.len()).max().unwrap();
        assert!(longest < text.len() / 8 + 16, "{longest}");
    }

    #[test]
    fn fill_reads_to_the_end_in_pieces() {
        let data: Vec<u8> = (0..=255u8).cycle().take(1000).collect();
        let mut src = &data[..];
        let mut buf = b"tail".to_vec();
        assert!(!fill(&mut src, &mut buf, 600).unwrap());
        assert_eq!(buf.len(), 604);
        assert!(fill(&mut src, &mut buf, 600).unwrap());
        assert_eq!(&buf[4..], &data[..]);
        assert!(fill(&mut src, &mut buf, 600).unwrap());
        assert_eq!(buf.len(), 1004);
    }
}
