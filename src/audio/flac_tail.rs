//! Whether a FLAC file ends with the whole last frame its STREAMINFO calls for, read from its
//! last bytes alone: what lets a resumed run trust a FLAC take without decoding it.
//!
//! Layouts from the FLAC specification (RFC 9639): STREAMINFO in 8.2, the frame header in
//! 9.1 (sync code, blocking strategy, block size and rate codes, the coded frame or sample
//! number, CRC-8) and the frame footer's CRC-16 in 9.3. The last frame is the one whose first
//! sample plus its block size is the stream's total; it is found by scanning back from the
//! end for a frame header whose CRC-8 holds, and it is whole when the CRC-16 over it, up to
//! the file's last two bytes, equals those bytes. A file cut anywhere, even exactly between
//! two frames, fails.

/// What the check needs from STREAMINFO.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct StreamInfo {
    /// Largest block, samples.
    pub max_block: u16,
    /// Largest frame, bytes (0: not known).
    pub max_frame_bytes: u32,
    /// Sample rate, Hz.
    pub rate: u32,
    /// Samples per channel in the stream (0: not known).
    pub total_samples: u64,
}

impl StreamInfo {
    /// Read the 34 bytes of a STREAMINFO block; `None` when the rate is 0.
    pub fn parse(info: &[u8; 34]) -> Option<Self> {
        let packed = u64::from_be_bytes(info[10..18].try_into().ok()?);
        let rate = (packed >> 44) as u32;
        (rate > 0).then(|| StreamInfo {
            max_block: u16::from_be_bytes([info[2], info[3]]),
            max_frame_bytes: u32::from_be_bytes([0, info[7], info[8], info[9]]),
            rate,
            total_samples: packed & ((1 << 36) - 1),
        })
    }
}

/// Whether `tail`, the last bytes of a FLAC file, holds its whole last frame.
pub fn ends_with_last_frame(tail: &[u8], info: &StreamInfo) -> bool {
    if info.total_samples == 0 || tail.len() < 8 {
        return false;
    }
    let crc_at = tail.len() - 2;
    let stored = u16::from_be_bytes([tail[crc_at], tail[crc_at + 1]]);
    (0..crc_at.saturating_sub(5)).rev().any(|p| {
        tail[p] == 0xFF
            && tail[p + 1] & 0xFE == 0xF8
            && frame_header(&tail[p..crc_at], info.max_block)
                .is_some_and(|(start, block)| start + block == info.total_samples)
            && crc16(&tail[p..crc_at]) == stored
    })
}

/// The first sample and the block size of the frame whose header starts `bytes`, when the
/// header is whole and its CRC-8 holds.
fn frame_header(bytes: &[u8], max_block: u16) -> Option<(u64, u64)> {
    let variable = bytes[1] & 1 == 1;
    let (size_code, rate_code) = (bytes[2] >> 4, bytes[2] & 0x0F);
    if size_code == 0 || rate_code == 0x0F || bytes[3] & 1 != 0 {
        return None;
    }
    let mut at = 4;
    let number = coded_number(bytes, &mut at)?;
    let block = match size_code {
        1 => 192,
        2..=5 => 576 << (size_code - 2),
        6 => u64::from(*bytes.get(at)?) + 1,
        7 => u64::from(u16::from_be_bytes([*bytes.get(at)?, *bytes.get(at + 1)?])) + 1,
        _ => 1 << size_code,
    };
    at += match size_code {
        6 => 1,
        7 => 2,
        _ => 0,
    };
    at += match rate_code {
        12 => 1,
        13 | 14 => 2,
        _ => 0,
    };
    if crc8(bytes.get(..at)?) != *bytes.get(at)? {
        return None;
    }
    let start = if variable {
        number
    } else {
        number * u64::from(max_block)
    };
    Some((start, block))
}

/// The frame or sample number, coded as UTF-8 extended to 7 bytes (RFC 9639, 9.1.5).
fn coded_number(bytes: &[u8], at: &mut usize) -> Option<u64> {
    let first = *bytes.get(*at)?;
    let extra = first.leading_ones() as usize;
    if extra == 1 || extra > 7 {
        return None;
    }
    let follow = extra.saturating_sub(1);
    let mut value = u64::from(first & (0x7F >> extra));
    for k in 1..=follow {
        let b = *bytes.get(*at + k)?;
        if b & 0xC0 != 0x80 {
            return None;
        }
        value = (value << 6) | u64::from(b & 0x3F);
    }
    *at += 1 + follow;
    Some(value)
}

/// CRC-8 of a frame header: polynomial x^8 + x^2 + x + 1, initial 0 (RFC 9639, 9.1.8).
fn crc8(bytes: &[u8]) -> u8 {
    bytes.iter().fold(0u8, |mut crc, &b| {
        crc ^= b;
        for _ in 0..8 {
            crc = if crc & 0x80 != 0 {
                (crc << 1) ^ 0x07
            } else {
                crc << 1
            };
        }
        crc
    })
}

/// CRC-16 of a frame: polynomial x^16 + x^15 + x^2 + 1, initial 0 (RFC 9639, 9.3).
fn crc16(bytes: &[u8]) -> u16 {
    bytes.iter().fold(0u16, |mut crc, &b| {
        crc ^= u16::from(b) << 8;
        for _ in 0..8 {
            crc = if crc & 0x8000 != 0 {
                (crc << 1) ^ 0x8005
            } else {
                crc << 1
            };
        }
        crc
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audio::{Audio, SampleFormat, write_audio};

    #[test]
    fn the_crcs_give_the_catalogue_check_values() {
        // Check values for "123456789" of CRC-8/SMBUS (poly 0x07) and CRC-16/UMTS, also
        // called BUYPASS (poly 0x8005), both with initial 0 and no reflection: from the CRC
        // catalogue (reveng), quoted from memory.
        assert_eq!(crc8(b"123456789"), 0xF4);
        assert_eq!(crc16(b"123456789"), 0xFEE8);
    }

    #[test]
    fn coded_numbers_read_as_utf8_does() {
        for n in [0u64, 1, 0x7F, 0x80, 0x7FF, 0x800, 0xFFFF, 0x10000, 0x10FFFF] {
            let Some(c) = char::from_u32(n as u32) else {
                continue;
            };
            let mut buf = [0u8; 4];
            let bytes = c.encode_utf8(&mut buf).as_bytes();
            let mut at = 0;
            assert_eq!(coded_number(bytes, &mut at), Some(n), "{n:#x}");
            assert_eq!(at, bytes.len());
        }
    }

    /// A FLAC file of `n` samples of a tone through the output writer, as bytes.
    fn flac(dir: &std::path::Path, n: usize) -> Vec<u8> {
        let path = dir.join(format!("t{n}.flac"));
        let samples = (0..n)
            .map(|i| 0.3 * (i as f32 * 0.05).sin() + 0.01 * ((i * 7919 % 97) as f32 / 97.0))
            .collect();
        write_audio(
            &path,
            &Audio {
                rate: 16_000,
                samples,
            },
            SampleFormat::Flac16,
        )
        .unwrap();
        std::fs::read(path).unwrap()
    }

    fn whole(bytes: &[u8]) -> bool {
        let info = StreamInfo::parse(bytes[8..42].try_into().unwrap()).unwrap();
        ends_with_last_frame(&bytes[42..], &info)
    }

    #[test]
    fn a_whole_file_passes_and_every_cut_fails() {
        let dir = tempfile::tempdir().unwrap();
        for n in [100, 4096, 4097, 3 * 4096, 20_000] {
            let bytes = flac(dir.path(), n);
            assert!(whole(&bytes), "{n} samples");
            for cut in [1, 2, 3, 17, 400] {
                if bytes.len() > cut + 42 {
                    assert!(
                        !whole(&bytes[..bytes.len() - cut]),
                        "{n} samples, cut {cut}"
                    );
                }
            }
        }
    }

    #[test]
    fn a_file_missing_its_last_frames_fails_though_its_header_is_whole() {
        // FLAC frames are coded independently, so the frames of the first 2 blocks of a
        // signal are the first frames of the whole signal: the header of the 3-block stream
        // over the frames of the 2-block one is that stream cut exactly between frames.
        let dir = tempfile::tempdir().unwrap();
        let (full, short) = (flac(dir.path(), 3 * 4096), flac(dir.path(), 2 * 4096));
        assert_eq!(full[42..42 + 100], short[42..42 + 100]);
        let mut cut = full[..42].to_vec();
        cut.extend_from_slice(&short[42..]);
        assert!(whole(&short) && !whole(&cut));
    }
}
