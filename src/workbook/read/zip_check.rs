//! Sizes a zip container (xlsx, xlsm, ods) declares, checked before anything is inflated.
//!
//! The central directory at the end of a zip file lists every member with its uncompressed
//! size (PKWARE APPNOTE.TXT, sections 4.3.12 and 4.3.16; zip64 sizes in the extra field of
//! section 4.5.3). A zip bomb declares gigabytes there, so it is refused here with a message
//! before the spreadsheet reader allocates. A file that lies about its sizes gets past this
//! check; the reader child process's memory limit ([`super::Isolation`]) catches it.

use super::ReadError;
use crate::limits::{MAX_UNZIPPED_BYTES, MAX_ZIP_ENTRIES};

const END_SIGNATURE: &[u8] = b"PK\x05\x06";
const ENTRY_SIGNATURE: &[u8] = b"PK\x01\x02";

fn u16_at(b: &[u8], at: usize) -> Option<u64> {
    b.get(at..at + 2)
        .map(|s| u64::from(u16::from_le_bytes([s[0], s[1]])))
}

fn u32_at(b: &[u8], at: usize) -> Option<u64> {
    b.get(at..at + 4)
        .map(|s| u64::from(u32::from_le_bytes([s[0], s[1], s[2], s[3]])))
}

fn u64_at(b: &[u8], at: usize) -> Option<u64> {
    let s = b.get(at..at + 8)?;
    let mut a = [0u8; 8];
    a.copy_from_slice(s);
    Some(u64::from_le_bytes(a))
}

/// Refuses a zip container whose members declare more than [`MAX_UNZIPPED_BYTES`] in all, or
/// that has more than [`MAX_ZIP_ENTRIES`] members. Bytes that are not a zip file, or whose
/// directory cannot be walked, pass: the reader then says what they are.
pub(super) fn check(bytes: &[u8]) -> Result<(), ReadError> {
    if !bytes.starts_with(b"PK") {
        return Ok(());
    }
    let Some(total) = declared_total(bytes) else {
        return Ok(());
    };
    match total {
        Declared::TooMany(n) => Err(ReadError::TooLarge {
            detail: format!(
                "the zip container holds {n} or more parts (at most {MAX_ZIP_ENTRIES} are read)"
            ),
        }),
        Declared::Bytes(n) if n > MAX_UNZIPPED_BYTES => Err(ReadError::TooLarge {
            detail: format!(
                "its parts unpack to {} MiB (at most {} MiB are read; a compressed file that \
                 unpacks to this much is not a case workbook)",
                n / (1024 * 1024),
                MAX_UNZIPPED_BYTES / (1024 * 1024)
            ),
        }),
        Declared::Bytes(_) => Ok(()),
    }
}

enum Declared {
    Bytes(u64),
    TooMany(usize),
}

/// The sum of the uncompressed sizes in the central directory; `None` where the directory
/// cannot be found or walked.
fn declared_total(bytes: &[u8]) -> Option<Declared> {
    let tail_start = bytes.len().saturating_sub(65_557);
    let end = tail_start
        + bytes[tail_start..]
            .windows(4)
            .rposition(|w| w == END_SIGNATURE)?;
    let mut offset = usize::try_from(u32_at(bytes, end + 16)?).ok()?;
    let mut total: u64 = 0;
    let mut count = 0usize;
    while bytes.get(offset..offset + 4) == Some(ENTRY_SIGNATURE) {
        count += 1;
        if count > MAX_ZIP_ENTRIES {
            return Some(Declared::TooMany(count));
        }
        let mut size = u32_at(bytes, offset + 24)?;
        let name_len = usize::try_from(u16_at(bytes, offset + 28)?).ok()?;
        let extra_len = usize::try_from(u16_at(bytes, offset + 30)?).ok()?;
        let comment_len = usize::try_from(u16_at(bytes, offset + 32)?).ok()?;
        if size == 0xFFFF_FFFF {
            // Zip64: the real size is the first field of the 0x0001 extra block.
            let extra_start = offset + 46 + name_len;
            let extra = bytes.get(extra_start..extra_start + extra_len)?;
            size = zip64_size(extra).unwrap_or(u64::MAX);
        }
        total = total.saturating_add(size);
        offset += 46 + name_len + extra_len + comment_len;
    }
    Some(Declared::Bytes(total))
}

fn zip64_size(extra: &[u8]) -> Option<u64> {
    let mut at = 0;
    while at + 4 <= extra.len() {
        let id = u16_at(extra, at)?;
        let len = usize::try_from(u16_at(extra, at + 2)?).ok()?;
        if id == 1 {
            return u64_at(extra, at + 4);
        }
        at += 4 + len;
    }
    None
}
