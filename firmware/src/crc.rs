//! Checksums.
//!
//! * CRC-16-CCITT (polynomial x¹⁶ + x¹² + x⁵ + 1 = 0x1021, seed 0xFFFF, no
//!   reflection, no final XOR): the converter's frame check. Check value of
//!   the ASCII string "123456789": 0x29B1 (the "CRC-16/CCITT-FALSE" entry of
//!   the standard CRC catalogues).
//! * CRC-32 (IEEE 802.3, reflected polynomial 0xEDB88320, seed and final XOR
//!   0xFFFFFFFF): the settings record. Check value 0xCBF43926.

/// CRC-16-CCITT over `data`, continuing from `crc` (start with 0xFFFF).
pub fn crc16_ccitt(mut crc: u16, data: &[u8]) -> u16 {
    for &b in data {
        crc ^= (b as u16) << 8;
        for _ in 0..8 {
            crc = if crc & 0x8000 != 0 { (crc << 1) ^ 0x1021 } else { crc << 1 };
        }
    }
    crc
}

/// CRC-32 (IEEE) of `data`.
pub fn crc32(data: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in data {
        crc ^= b as u32;
        for _ in 0..8 {
            crc = if crc & 1 != 0 { (crc >> 1) ^ 0xEDB8_8320 } else { crc >> 1 };
        }
    }
    !crc
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_values_from_the_crc_catalogue() {
        // Standard check values for "123456789" (Williams, "A painless guide to CRC error
        // detection algorithms", 1993, and the catalogues that follow it): CRC-16/CCITT-FALSE
        // 0x29B1, CRC-32 0xCBF43926.
        assert_eq!(crc16_ccitt(0xFFFF, b"123456789"), 0x29B1);
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    }
}
