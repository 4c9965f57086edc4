//! A walk over a DICOM file's element headers (PS3.5 §7.1, PS3.10 §7.1) that refuses a
//! declared value length running past the end of the file, before the file reaches the
//! DICOM library: that library sets aside and zero-fills a value's declared length (up to
//! 4 GiB) before it finds the file too short, so a few corrupt bytes could cost gigabytes.
//!
//! The walk only reads tags, VRs and lengths, the way the library does (an unknown VR is
//! read as UN). Deflated data sets are left to the library.

/// Transfer syntax of the data set after the file meta group.
#[derive(Clone, Copy, PartialEq)]
enum Encoding {
    ExplicitLittle,
    ExplicitBig,
    ImplicitLittle,
}

/// VRs with a 2-byte length in explicit encodings (PS3.5 §7.1.2, Table 7.1-2); every other
/// VR, and a VR that is not one at all (read as UN, as the DICOM library does), has a
/// 2-byte reserved field and a 4-byte length.
const SHORT_VRS: [&[u8; 2]; 21] = [
    b"AE", b"AS", b"AT", b"CS", b"DA", b"DS", b"DT", b"FL", b"FD", b"IS", b"LO", b"LT", b"PN",
    b"SH", b"SL", b"SS", b"ST", b"TM", b"UI", b"UL", b"US",
];

const UNDEFINED: u32 = 0xFFFF_FFFF;

/// Checks every declared length in `bytes` (a whole Part-10 file) against what remains.
///
/// # Errors
/// A message naming the element's tag, its declared length, its offset and the bytes left.
pub fn check(bytes: &[u8]) -> Result<(), String> {
    if bytes.len() < 132 || &bytes[128..132] != b"DICM" {
        return Ok(());
    }
    let mut at = 132;
    let mut encoding = Encoding::ExplicitLittle;
    let mut meta = true;
    let mut syntax = String::new();
    let mut encapsulated = false;
    while at + 8 <= bytes.len() {
        let big = encoding == Encoding::ExplicitBig && !meta;
        let u16_at = |i: usize| {
            let b = [bytes[i], bytes[i + 1]];
            if big {
                u16::from_be_bytes(b)
            } else {
                u16::from_le_bytes(b)
            }
        };
        let u32_at = |i: usize| {
            let b = [bytes[i], bytes[i + 1], bytes[i + 2], bytes[i + 3]];
            if big {
                u32::from_be_bytes(b)
            } else {
                u32::from_le_bytes(b)
            }
        };
        let (group, element) = (u16_at(at), u16_at(at + 2));
        if meta && group != 0x0002 {
            meta = false;
            encoding = match syntax.trim_end_matches(['\0', ' ']) {
                "1.2.840.10008.1.2" => Encoding::ImplicitLittle,
                "1.2.840.10008.1.2.2" => Encoding::ExplicitBig,
                "1.2.840.10008.1.2.1.99" => return Ok(()),
                _ => Encoding::ExplicitLittle,
            };
            continue;
        }
        let tag = format!("({group:04X},{element:04X}) at byte {at}");
        if group == 0xFFFE {
            // Item, item delimiter or sequence delimiter: tag and a 4-byte length.
            let len = u32_at(at + 4);
            at += 8;
            if element == 0xE0DD {
                encapsulated = false;
            } else if element == 0xE000 && len != UNDEFINED {
                let end = skip(bytes, at, len, &tag)?;
                if encapsulated {
                    at = end; // a fragment of compressed pixel data
                }
            }
            continue;
        }
        let implicit = encoding == Encoding::ImplicitLittle && !meta;
        let (vr, len, header) = if implicit {
            (None, u32_at(at + 4), 8)
        } else {
            let vr = [bytes[at + 4], bytes[at + 5]];
            if SHORT_VRS.contains(&&vr) {
                (Some(vr), u32::from(u16_at(at + 6)), 8)
            } else {
                if at + 12 > bytes.len() {
                    return Ok(());
                }
                (Some(vr), u32_at(at + 8), 12)
            }
        };
        at += header;
        if len == UNDEFINED {
            // A sequence, or encapsulated pixel data: its items follow.
            encapsulated = (group, element) == (0x7FE0, 0x0010);
            continue;
        }
        if vr == Some(*b"SQ") {
            skip(bytes, at, len, &tag)?;
            continue; // defined-length sequence: walk into its items
        }
        let value_start = at;
        at = skip(bytes, at, len, &tag)?;
        if meta && (group, element) == (0x0002, 0x0010) {
            syntax = String::from_utf8_lossy(&bytes[value_start..at]).into_owned();
        }
    }
    Ok(())
}

fn skip(bytes: &[u8], at: usize, len: u32, tag: &str) -> Result<usize, String> {
    let left = bytes.len() - at;
    if len as usize > left {
        return Err(format!(
            "element {tag} declares {len} bytes of value but only {left} remain (truncated or corrupt file)"
        ));
    }
    Ok(at + len as usize)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Preamble, `DICM`, a meta group with an explicit-VR-little-endian transfer syntax,
    /// then `body`.
    fn file(body: &[u8]) -> Vec<u8> {
        let mut b = vec![0u8; 128];
        b.extend_from_slice(b"DICM");
        let uid = b"1.2.840.10008.1.2.1\0";
        b.extend_from_slice(&[0x02, 0x00, 0x10, 0x00, b'U', b'I', uid.len() as u8, 0]);
        b.extend_from_slice(uid);
        b.extend_from_slice(body);
        b
    }

    /// Lengths as PS3.5 §7.1.2 lays them out: a 2-byte length for US, a 4-byte one for OB.
    #[test]
    fn lengths_within_the_file_pass_and_a_long_one_is_named() {
        // (0028,0010) US 2 = 64, then (7FE0,0010) OB with 4 bytes.
        let mut ok = vec![0x28, 0x00, 0x10, 0x00, b'U', b'S', 2, 0, 64, 0];
        ok.extend_from_slice(&[
            0xE0, 0x7F, 0x10, 0x00, b'O', b'B', 0, 0, 4, 0, 0, 0, 1, 2, 3, 4,
        ]);
        assert!(check(&file(&ok)).is_ok());
        let mut bad = ok.clone();
        bad[18..22].copy_from_slice(&0xF000_0000u32.to_le_bytes());
        let e = check(&file(&bad)).unwrap_err();
        assert!(e.contains("(7FE0,0010)") && e.contains("4026531840"), "{e}");
    }
}
