//! Binary-table row layout: where each column sits in a row and how to read the
//! numeric ones (FITS Standard 4.0, §7.3: `TFORMn = rT`, big-endian values).

use super::cards::Cards;

/// One column of a binary table.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    pub name: String,
    /// Data type letter of `TFORMn` (`B`, `I`, `E`, `D` ...).
    pub code: char,
    /// Repeat count (number of elements; bits for `X`).
    pub repeat: usize,
    /// Byte offset within a row.
    pub offset: usize,
    /// Bytes the column occupies in a row.
    pub width: usize,
    /// `TZEROn`, added to stored integers (0 if absent).
    pub zero: f64,
}

/// Parses `TFORMn` (`"16384B"`, `"E"`, `"1PB(100)"`) into repeat count, type and bytes.
pub fn parse_tform(tform: &str) -> Result<(usize, char, usize), String> {
    let t = tform.trim();
    let digits = t.chars().take_while(char::is_ascii_digit).count();
    let repeat = if digits == 0 {
        1
    } else {
        t[..digits]
            .parse::<usize>()
            .map_err(|_| format!("bad TFORM '{tform}'"))?
    };
    let code = t[digits..]
        .chars()
        .next()
        .ok_or_else(|| format!("bad TFORM '{tform}'"))?;
    let (num, den) = match code {
        'X' => (1, 8),
        'L' | 'B' | 'A' => (1, 1),
        'I' => (2, 1),
        'J' | 'E' => (4, 1),
        // P and Q are array descriptors: 8 and 16 bytes in the row.
        'K' | 'D' | 'C' | 'P' => (8, 1),
        'M' | 'Q' => (16, 1),
        _ => return Err(format!("unknown data type in TFORM '{tform}'")),
    };
    let bytes = repeat
        .checked_mul(num)
        .map(|b| b.div_ceil(den))
        .ok_or_else(|| format!("TFORM '{tform}' is too large"))?;
    Ok((repeat, code, bytes))
}

/// The columns of a binary table described by `cards`, checked against `NAXIS1`.
pub fn columns(cards: &Cards) -> Result<Vec<Column>, String> {
    let n = cards.count("TFIELDS")?;
    let mut cols = Vec::with_capacity(n);
    let mut offset = 0;
    for i in 1..=n {
        let tform = cards
            .str(&format!("TFORM{i}"))
            .ok_or_else(|| format!("keyword TFORM{i} is missing"))?;
        let (repeat, code, width) = parse_tform(tform)?;
        let zero = cards.f64(&format!("TZERO{i}")).unwrap_or(0.0);
        cols.push(Column {
            name: cards.str(&format!("TTYPE{i}")).unwrap_or("").to_string(),
            code,
            repeat,
            offset,
            width,
            zero,
        });
        offset = offset
            .checked_add(width)
            .ok_or("table row length overflows")?;
    }
    let naxis1 = cards.count("NAXIS1")?;
    if offset != naxis1 {
        return Err(format!(
            "table columns add up to {offset} bytes per row but NAXIS1 is {naxis1}"
        ));
    }
    Ok(cols)
}

impl Column {
    /// The column's bytes within `row`.
    pub fn bytes<'a>(&self, row: &'a [u8]) -> &'a [u8] {
        &row[self.offset..self.offset + self.width]
    }

    /// Reads the first `n` elements of a numeric column as `f64` into `out`.
    ///
    /// # Errors
    /// If the column holds fewer than `n` elements or is not numeric.
    pub fn read_f64(&self, row: &[u8], n: usize, out: &mut Vec<f64>) -> Result<(), String> {
        if self.repeat < n {
            return Err(format!(
                "column {} has {} elements, expected {n}",
                self.name, self.repeat
            ));
        }
        let b = self.bytes(row);
        out.clear();
        let zero = self.zero;
        match self.code {
            'E' => out.extend(be_chunks::<4>(b, n).map(|c| f32::from_be_bytes(c) as f64)),
            'D' => out.extend(be_chunks::<8>(b, n).map(f64::from_be_bytes)),
            'B' => out.extend(b[..n].iter().map(|&v| v as f64 + zero)),
            'I' => out.extend(be_chunks::<2>(b, n).map(|c| i16::from_be_bytes(c) as f64 + zero)),
            'J' => out.extend(be_chunks::<4>(b, n).map(|c| i32::from_be_bytes(c) as f64 + zero)),
            c => return Err(format!("column {} has non-numeric type {c}", self.name)),
        }
        Ok(())
    }
}

fn be_chunks<const N: usize>(b: &[u8], n: usize) -> impl Iterator<Item = [u8; N]> + '_ {
    b[..n * N]
        .chunks_exact(N)
        .map(|c| c.try_into().expect("chunk of N bytes"))
}

/// Finds the column named `name`.
pub fn find<'a>(cols: &'a [Column], name: &str) -> Option<&'a Column> {
    cols.iter().find(|c| c.name.eq_ignore_ascii_case(name))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tforms_parse() {
        assert_eq!(parse_tform("16384B"), Ok((16384, 'B', 16384)));
        assert_eq!(parse_tform("E"), Ok((1, 'E', 4)));
        assert_eq!(parse_tform("1D"), Ok((1, 'D', 8)));
        assert_eq!(parse_tform("64E"), Ok((64, 'E', 256)));
        assert_eq!(parse_tform("12X"), Ok((12, 'X', 2)));
        assert_eq!(parse_tform("1PB(100)"), Ok((1, 'P', 8)));
        assert!(parse_tform("7Z").is_err());
        assert!(parse_tform("").is_err());
    }

    #[test]
    fn numeric_columns_read() {
        let col = |code, repeat, width, zero| Column {
            name: "X".into(),
            code,
            repeat,
            offset: 1,
            width,
            zero,
        };
        let mut out = Vec::new();
        let row = [9u8, 0x3f, 0x80, 0, 0, 0xc0, 0, 0, 0];
        col('E', 2, 8, 0.0).read_f64(&row, 2, &mut out).unwrap();
        assert_eq!(out, [1.0, -2.0]);
        col('I', 1, 2, 32768.0).read_f64(&row, 1, &mut out).unwrap();
        assert_eq!(out, [(0x3f80 as f64) + 32768.0]);
        assert!(col('E', 2, 8, 0.0).read_f64(&row, 3, &mut out).is_err());
    }
}
