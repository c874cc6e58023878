//! The FITS checksum convention (Seaman, Pence & Rots 2002, as adopted in FITS Standard 4.0,
//! appendix J): 32-bit ones' complement sums of big-endian words, and the 16-character ASCII
//! encoding that makes a whole HDU sum to negative zero (all bits set).

/// The ones' complement sum that a verified HDU has: "negative zero".
pub(super) const NEGATIVE_ZERO: u32 = u32::MAX;

/// Ones' complement addition of two 32-bit words (the carry out of bit 31 wraps into bit 0).
pub(super) fn ones_add(a: u32, b: u32) -> u32 {
    fold(a as u64 + b as u64)
}

/// Folds the carries of a 64-bit accumulator back into 32 bits.
fn fold(mut s: u64) -> u32 {
    while s >> 32 != 0 {
        s = (s & 0xFFFF_FFFF) + (s >> 32);
    }
    s as u32
}

/// Ones' complement sum of `bytes` read as big-endian 32-bit words; the length must be a
/// multiple of 4 (FITS blocks of 2880 bytes always are).
pub(super) fn ones_sum(bytes: &[u8]) -> u32 {
    debug_assert!(bytes.len().is_multiple_of(4));
    // A u64 holds 2^32 words before it can overflow; fold well before that.
    bytes.chunks(4 << 20).fold(0, |acc, chunk| {
        let s: u64 = chunk
            .chunks_exact(4)
            .map(|w| u32::from_be_bytes([w[0], w[1], w[2], w[3]]) as u64)
            .sum();
        ones_add(acc, fold(s))
    })
}

/// ASCII codes between '0' and 'z' that the encoding avoids: `:;<=>?@` and `` [\]^_` ``.
const PUNCTUATION: [u8; 13] = [
    0x3a, 0x3b, 0x3c, 0x3d, 0x3e, 0x3f, 0x40, 0x5b, 0x5c, 0x5d, 0x5e, 0x5f, 0x60,
];

/// The 16 characters to put in the CHECKSUM value when the HDU, with `0000000000000000` in that
/// value, has the ones' complement sum `sum`. Written from the convention: each byte of the
/// complemented sum is split into four characters offset by ASCII '0', pairs are nudged off
/// punctuation, and the string is rotated one place right because the value starts at byte 11
/// of its card, which is 3 modulo 4.
pub(super) fn encode_complement(sum: u32) -> [u8; 16] {
    let value = !sum;
    let mut interleaved = [0u8; 16];
    for (i, byte) in value.to_be_bytes().into_iter().enumerate() {
        let quotient = byte / 4 + b'0';
        let mut ch = [quotient; 4];
        ch[0] += byte % 4;
        // Moving one unit from ch[j+1] to ch[j] keeps the pair's sum (and so the checksum).
        let mut nudged = true;
        while nudged {
            nudged = false;
            for j in [0, 2] {
                if PUNCTUATION.contains(&ch[j]) || PUNCTUATION.contains(&ch[j + 1]) {
                    ch[j] += 1;
                    ch[j + 1] -= 1;
                    nudged = true;
                }
            }
        }
        for (j, &c) in ch.iter().enumerate() {
            interleaved[4 * j + i] = c;
        }
    }
    std::array::from_fn(|k| interleaved[(k + 15) % 16])
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A deterministic pseudo-random byte stream (64-bit LCG, Knuth's MMIX constants, from
    /// memory); any bytes do.
    fn bytes(n: usize, seed: u64) -> Vec<u8> {
        let mut s = seed;
        (0..n)
            .map(|_| {
                s = s
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (s >> 56) as u8
            })
            .collect()
    }

    #[test]
    fn ones_complement_arithmetic() {
        // End-around carry: 0xFFFFFFFF + 1 = 0x1_00000000 -> 1 (ones' complement, common
        // practice).
        assert_eq!(ones_add(u32::MAX, 1), 1);
        assert_eq!(ones_add(0x8000_0000, 0x8000_0000), 1);
        assert_eq!(ones_sum(&[0, 0, 0, 1, 0xFF, 0xFF, 0xFF, 0xFF]), 1);
        // Order does not matter, and the chunked sum equals the word-by-word sum.
        let data = bytes(4 * 3000, 7);
        let by_word = data.chunks_exact(4).fold(0, |acc, w| {
            ones_add(acc, u32::from_be_bytes([w[0], w[1], w[2], w[3]]))
        });
        assert_eq!(ones_sum(&data), by_word);
    }

    #[test]
    fn encoded_value_completes_the_sum_to_negative_zero() {
        for seed in 0..200 {
            // An "HDU" of two blocks whose byte 11 starts a '0000000000000000' value.
            let mut hdu = bytes(2 * 2880, seed);
            hdu[11..27].copy_from_slice(b"0000000000000000");
            let code = encode_complement(ones_sum(&hdu));
            assert!(
                code.iter().all(|c| c.is_ascii_alphanumeric()),
                "{:?}",
                std::str::from_utf8(&code)
            );
            hdu[11..27].copy_from_slice(&code);
            assert_eq!(ones_sum(&hdu), NEGATIVE_ZERO, "seed {seed}");
        }
    }
}
