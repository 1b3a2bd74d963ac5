//! Framing: a payload (postcard) with a CRC, COBS-encoded, ended by a zero.
//!
//! ```text
//! payload = postcard(message)                 at most MAX_PAYLOAD bytes
//! checked = payload ++ crc16(payload)         CRC-16/IBM-3740, little-endian
//! frame   = cobs(checked) ++ [0x00]           at most MAX_FRAME bytes
//! ```
//!
//! COBS (Cheshire and Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM
//! Transactions on Networking, 1999) leaves no zero inside a frame, so a
//! receiver that lost bytes finds the next frame at the next zero. The CRC
//! is CRC-16/IBM-3740 (polynomial 0x1021, initial 0xFFFF, no reflection; the
//! catalogue's check value for "123456789" is 0x29B1), from the `crc`
//! crate's 256-entry table (512 bytes of flash).
//!
//! [`FrameDecoder`] takes one byte at a time, so a UART interrupt (through a
//! byte queue) or a polling loop can feed it, and never panics: an
//! overlong frame is counted as [`FrameError::Oversized`] at its closing zero,
//! a bad COBS code or CRC as [`FrameError::Corrupt`], and the decoder is
//! ready for the next frame either way.

use crc::{CRC_16_IBM_3740, Crc, Table};
use serde::Serialize;
use serde::de::DeserializeOwned;

/// Longest payload, bytes.
pub const MAX_PAYLOAD: usize = 200;
const CRC_LEN: usize = 2;
/// Longest frame on the line, its closing zero included.
pub const MAX_FRAME: usize = cobs::max_encoding_length(MAX_PAYLOAD + CRC_LEN) + 1;

const CRC16: Crc<u16, Table<1>> = Crc::<u16, Table<1>>::new(&CRC_16_IBM_3740);

/// The frame check of `bytes` (CRC-16/IBM-3740).
pub fn crc16(bytes: &[u8]) -> u16 {
    CRC16.checksum(bytes)
}

/// Why a frame was not delivered.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FrameError {
    /// Longer than [`MAX_FRAME`]; dropped.
    Oversized,
    /// A bad COBS code, too short for its check, or a failed check; dropped.
    Corrupt,
    /// The message did not fit [`MAX_PAYLOAD`] (encoding only).
    TooLong,
}

/// Encodes `message` as one frame into `out`, returning its length (the
/// closing zero included).
pub fn encode<T: Serialize>(message: &T, out: &mut [u8; MAX_FRAME]) -> Result<usize, FrameError> {
    let mut checked = [0u8; MAX_PAYLOAD + CRC_LEN];
    let (payload, _) = checked.split_at_mut(MAX_PAYLOAD);
    let len = postcard::to_slice(message, payload)
        .map_err(|_| FrameError::TooLong)?
        .len();
    let crc = crc16(checked.get(..len).ok_or(FrameError::TooLong)?).to_le_bytes();
    let tail = checked.get_mut(len..len + CRC_LEN).ok_or(FrameError::TooLong)?;
    tail.copy_from_slice(&crc);
    let body = checked.get(..len + CRC_LEN).ok_or(FrameError::TooLong)?;
    let (encoded, _) = out.split_at_mut(MAX_FRAME - 1);
    let n = cobs::try_encode(body, encoded).map_err(|_| FrameError::TooLong)?;
    *out.get_mut(n).ok_or(FrameError::TooLong)? = 0;
    Ok(n + 1)
}

/// Undoes COBS in place (a frame without its closing zero); the decoded
/// length, or `None` for a code that runs past the end or a zero inside.
///
/// Written here rather than taken from the `cobs` crate (whose encoder
/// [`encode`] uses): its decoder indexes the buffer where the optimiser
/// cannot prove the index in range, and the no-panic link check fails on
/// the bounds check. The decoded bytes never overtake the encoded ones
/// (`dst < src` throughout), so decoding in place is sound.
pub fn cobs_decode_in_place(buf: &mut [u8]) -> Option<usize> {
    let len = buf.len();
    let (mut src, mut dst) = (0, 0);
    while src < len {
        let code = *buf.get(src)? as usize;
        if code == 0 {
            return None;
        }
        src += 1;
        let end = src + code - 1;
        if end > len {
            return None;
        }
        while src < end {
            let b = *buf.get(src)?;
            if b == 0 {
                return None;
            }
            *buf.get_mut(dst)? = b;
            src += 1;
            dst += 1;
        }
        if code != 0xFF && src < len {
            *buf.get_mut(dst)? = 0;
            dst += 1;
        }
    }
    Some(dst)
}

/// Reads a whole checked payload as one message (the host reads replies
/// with it, the device requests); `None` when it is not one, or has bytes
/// left over.
pub fn parse<T: DeserializeOwned>(payload: &[u8]) -> Option<T> {
    match postcard::take_from_bytes::<T>(payload) {
        Ok((message, [])) => Some(message),
        _ => None,
    }
}

/// Collects bytes into frames, one byte at a time.
#[derive(Clone, Debug)]
pub struct FrameDecoder {
    buf: [u8; MAX_FRAME],
    len: usize,
    overflow: bool,
}

impl Default for FrameDecoder {
    fn default() -> Self {
        Self::new()
    }
}

impl FrameDecoder {
    /// An empty decoder.
    pub const fn new() -> Self {
        Self {
            buf: [0; MAX_FRAME],
            len: 0,
            overflow: false,
        }
    }

    /// One received byte. At a closing zero: the checked payload, or why the
    /// frame was dropped; `None` otherwise (and for empty frames, so repeated
    /// zeros resynchronise a line without noise).
    pub fn push(&mut self, byte: u8) -> Option<Result<&[u8], FrameError>> {
        if byte != 0 {
            match self.buf.get_mut(self.len) {
                Some(slot) if self.len < MAX_FRAME - 1 => {
                    *slot = byte;
                    self.len += 1;
                }
                _ => self.overflow = true,
            }
            return None;
        }
        let (len, overflow) = (self.len, self.overflow);
        self.len = 0;
        self.overflow = false;
        if overflow {
            return Some(Err(FrameError::Oversized));
        }
        if len == 0 {
            return None;
        }
        Some(self.check(len))
    }

    fn check(&mut self, len: usize) -> Result<&[u8], FrameError> {
        let frame = self.buf.get_mut(..len).ok_or(FrameError::Corrupt)?;
        let n = cobs_decode_in_place(frame).ok_or(FrameError::Corrupt)?;
        let decoded = self.buf.get(..n).ok_or(FrameError::Corrupt)?;
        if n < CRC_LEN {
            return Err(FrameError::Corrupt);
        }
        let (payload, crc) = decoded.split_at(n - CRC_LEN);
        let want = u16::from_le_bytes([
            crc.first().copied().unwrap_or(0),
            crc.get(1).copied().unwrap_or(0),
        ]);
        if crc16(payload) != want {
            return Err(FrameError::Corrupt);
        }
        Ok(payload)
    }
}
