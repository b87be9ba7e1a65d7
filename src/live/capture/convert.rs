//! Sample formats the capture path reads, each with its conversion to f32 at full scale ±1.

use cpal::{I24, U24};

/// A sample type the capture path reads, with its conversion to f32 at full scale ±1.
pub trait UnitSample: Copy + Send + 'static {
    /// The value at full scale ±1: an n-bit signed code `c` is `c / 2^(n−1)`; unsigned codes are
    /// centred on `2^(n−1)` first; floats pass through.
    fn to_unit(self) -> f32;
}

impl UnitSample for f32 {
    fn to_unit(self) -> f32 {
        self
    }
}

impl UnitSample for f64 {
    fn to_unit(self) -> f32 {
        self as f32
    }
}

impl UnitSample for i8 {
    fn to_unit(self) -> f32 {
        f32::from(self) / 128.0
    }
}

impl UnitSample for i16 {
    fn to_unit(self) -> f32 {
        f32::from(self) / 32_768.0
    }
}

impl UnitSample for I24 {
    fn to_unit(self) -> f32 {
        // 24 bits fit the f32 mantissa: exact.
        self.inner() as f32 / 8_388_608.0
    }
}

impl UnitSample for i32 {
    fn to_unit(self) -> f32 {
        (f64::from(self) / 2_147_483_648.0) as f32
    }
}

impl UnitSample for i64 {
    fn to_unit(self) -> f32 {
        (self as f64 / 9_223_372_036_854_775_808.0) as f32
    }
}

impl UnitSample for u8 {
    fn to_unit(self) -> f32 {
        (f32::from(self) - 128.0) / 128.0
    }
}

impl UnitSample for u16 {
    fn to_unit(self) -> f32 {
        (f32::from(self) - 32_768.0) / 32_768.0
    }
}

impl UnitSample for U24 {
    fn to_unit(self) -> f32 {
        (self.inner() - 8_388_608) as f32 / 8_388_608.0
    }
}

impl UnitSample for u32 {
    fn to_unit(self) -> f32 {
        ((f64::from(self) - 2_147_483_648.0) / 2_147_483_648.0) as f32
    }
}

impl UnitSample for u64 {
    fn to_unit(self) -> f32 {
        // Flipping the top bit centres the code: the result read as i64 is `code - 2^63`.
        i64::from_ne_bytes((self ^ (1 << 63)).to_ne_bytes()).to_unit()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integer_codes_map_to_full_scale() {
        assert_eq!(i8::MIN.to_unit(), -1.0);
        assert_eq!(64i8.to_unit(), 0.5);
        assert_eq!(I24::new(-8_388_608).map(I24::to_unit), Some(-1.0));
        assert_eq!(I24::new(4_194_304).map(I24::to_unit), Some(0.5));
        assert_eq!(i32::MIN.to_unit(), -1.0);
        assert_eq!((1i32 << 30).to_unit(), 0.5);
        assert_eq!(i64::MIN.to_unit(), -1.0);
        assert_eq!((1i64 << 62).to_unit(), 0.5);
        assert_eq!(0u8.to_unit(), -1.0);
        assert_eq!(128u8.to_unit(), 0.0);
        assert_eq!(0u16.to_unit(), -1.0);
        assert_eq!(32_768u16.to_unit(), 0.0);
        assert_eq!(49_152u16.to_unit(), 0.5);
        assert_eq!(U24::new(0).map(U24::to_unit), Some(-1.0));
        assert_eq!(U24::new(8_388_608).map(U24::to_unit), Some(0.0));
        assert_eq!(0u32.to_unit(), -1.0);
        assert_eq!((3u32 << 30).to_unit(), 0.5);
        assert_eq!(0u64.to_unit(), -1.0);
        assert_eq!((1u64 << 63).to_unit(), 0.0);
        assert_eq!((3u64 << 62).to_unit(), 0.5);
        assert_eq!(0.25f64.to_unit(), 0.25);
    }
}
