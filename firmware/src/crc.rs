//! Checksums, from the `crc` crate's catalogue of named algorithms.
//!
//! * CRC-16/IBM-3740 (also called CRC-16/CCITT-FALSE: polynomial x¹⁶ + x¹² + x⁵ + 1 =
//!   0x1021, seed 0xFFFF, no reflection, no final XOR): the converter's frame check.
//!   Table-driven (512 bytes of table): it runs on every frame, 32 000 times a second.
//! * CRC-32/ISO-HDLC (IEEE 802.3: reflected 0x04C11DB7, seed and final XOR 0xFFFFFFFF):
//!   the settings record. Bitwise (no table): it runs only when settings are loaded or saved.

use crc::{Crc, NoTable, Table, CRC_16_IBM_3740, CRC_32_ISO_HDLC};

/// The converter's frame CRC.
pub const FRAME_CRC: Crc<u16, Table<1>> = Crc::<u16, Table<1>>::new(&CRC_16_IBM_3740);
/// The settings record's CRC.
pub const RECORD_CRC: Crc<u32, NoTable> = Crc::<u32, NoTable>::new(&CRC_32_ISO_HDLC);

/// CRC-16/IBM-3740 of `data` (the converter's frame check).
pub fn crc16(data: &[u8]) -> u16 {
    FRAME_CRC.checksum(data)
}

/// CRC-32/ISO-HDLC of `data` (the settings record).
pub fn crc32(data: &[u8]) -> u32 {
    RECORD_CRC.checksum(data)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_values_from_the_crc_catalogue() {
        // Check values for "123456789" (Williams, "A painless guide to CRC error detection
        // algorithms", 1993, and the catalogues that follow it): CRC-16/CCITT-FALSE 0x29B1,
        // CRC-32 0xCBF43926.
        assert_eq!(crc16(b"123456789"), 0x29B1);
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    }
}
