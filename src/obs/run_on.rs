//! A recording read on into the first rows of the file that continues it
//! ([`Header::is_continued_by`]): a burst near its end whose sweep crosses into the
//! next file is then searched at every trial DM, as if the files were one.

use super::{ByteRows, Header, SampleSource};
use crate::error::{Error, Result};

/// The rows of `first`, then at most `extra` rows of `next`. Its header is
/// `first`'s with those rows added to `n_samples`. An error reading `next` ends the
/// rows instead (the search of `next` itself reports it). Byte reads when both
/// sources have them.
pub struct RunOn {
    first: Box<dyn SampleSource>,
    next: Box<dyn SampleSource>,
    header: Header,
    /// Rows of `next` still to hand out.
    extra: u64,
    in_next: bool,
    bytes: bool,
}

impl RunOn {
    /// `first` read on into at most `extra` rows of `next`, which must continue it.
    ///
    /// # Errors
    /// [`Error::Config`] if `next` does not continue `first`.
    pub fn new(
        mut first: Box<dyn SampleSource>,
        mut next: Box<dyn SampleSource>,
        extra: u64,
    ) -> Result<Self> {
        if !first.header().is_continued_by(next.header()) {
            return Err(Error::Config(
                "a recording can only be read on into one that continues it".into(),
            ));
        }
        let extra = extra.min(next.header().n_samples);
        let mut header = first.header().clone();
        header.n_samples += extra;
        let bytes = first.byte_rows().is_some() && next.byte_rows().is_some();
        Ok(RunOn {
            first,
            next,
            header,
            extra,
            in_next: false,
            bytes,
        })
    }

    /// Rows of the next recording added.
    pub fn extra_rows(&self) -> u64 {
        self.header.n_samples - self.first.header().n_samples
    }

    /// Reads with `read` from `first` until it ends, then at most the remaining extra
    /// rows from `next`, where an error ends the rows.
    fn read_with<T>(
        &mut self,
        out: &mut [T],
        read: impl Fn(&mut dyn SampleSource, &mut [T]) -> Result<usize>,
    ) -> Result<usize> {
        if !self.in_next {
            let got = read(&mut *self.first, out)?;
            if got > 0 {
                return Ok(got);
            }
            self.in_next = true;
        }
        let n_chan = self.header.n_chan();
        let want = (out.len() / n_chan).min(usize::try_from(self.extra).unwrap_or(usize::MAX));
        let got = read(&mut *self.next, &mut out[..want * n_chan]).unwrap_or(0);
        // After an error or the end of `next`, nothing more.
        self.extra = if got == 0 { 0 } else { self.extra - got as u64 };
        Ok(got)
    }
}

impl SampleSource for RunOn {
    fn header(&self) -> &Header {
        &self.header
    }

    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        self.read_with(out, |s, out| s.read_rows(out))
    }

    fn byte_rows(&mut self) -> Option<&mut dyn ByteRows> {
        match self.bytes {
            true => Some(self),
            false => None,
        }
    }
}

impl ByteRows for RunOn {
    fn read_byte_rows(&mut self, out: &mut [u8]) -> Result<usize> {
        self.read_with(out, |s, out| match s.byte_rows() {
            Some(b) => b.read_byte_rows(out),
            None => Err(Error::Config("byte reads of a source that has none".into())),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::{MemorySource, fill_rows, test_header};

    fn pair(n_first: u64, n_next: u64) -> (Box<dyn SampleSource>, Box<dyn SampleSource>) {
        let a = test_header(3, n_first);
        let mut b = test_header(3, n_next);
        b.start = a.epoch_of_sample(n_first as f64);
        let values = |h: &Header, base: f32| (0..h.n_samples * 3).map(move |i| base + i as f32);
        let first = MemorySource::new(a.clone(), values(&a, 0.0).collect());
        let next = MemorySource::new(b.clone(), values(&b, 1000.0).collect());
        (Box::new(first), Box::new(next))
    }

    // The rows are the first recording's, then exactly `extra` of the next one's,
    // however the reads are cut; and never more than the next one has.
    #[test]
    fn reads_run_on_into_the_next_recording_for_the_rows_asked() {
        for (extra, want_extra) in [(0, 0), (4, 4), (50, 7)] {
            let (first, next) = pair(5, 7);
            let mut run_on = RunOn::new(first, next, extra).unwrap();
            assert_eq!(run_on.extra_rows(), want_extra);
            assert_eq!(run_on.header().n_samples, 5 + want_extra);
            let mut got = Vec::new();
            let mut buf = vec![0.0; 2 * 3];
            loop {
                let n = fill_rows(&mut run_on, &mut buf).unwrap();
                got.extend_from_slice(&buf[..n * 3]);
                if n == 0 {
                    break;
                }
            }
            let want: Vec<f32> = (0..15)
                .map(|i| i as f32)
                .chain((0..want_extra * 3).map(|i| 1000.0 + i as f32))
                .collect();
            assert_eq!(got, want, "extra {extra}");
        }
    }

    #[test]
    fn only_a_continuing_recording_is_read_on_into() {
        // The next recording starts a sample after the first ends.
        let (first, _) = pair(5, 7);
        let (_, late) = pair(6, 7);
        assert!(matches!(RunOn::new(first, late, 3), Err(Error::Config(_))));
    }

    /// A recording whose every read fails.
    struct Unreadable(Header);

    impl SampleSource for Unreadable {
        fn header(&self) -> &Header {
            &self.0
        }
        fn read_rows(&mut self, _: &mut [f32]) -> Result<usize> {
            Err(Error::bad_input("next.fits", "truncated"))
        }
    }

    // A next recording that cannot be read ends the rows after the first one's; its
    // own search reports the error.
    #[test]
    fn an_unreadable_next_recording_ends_the_rows() {
        let (first, next) = pair(5, 7);
        let broken = Box::new(Unreadable(next.header().clone()));
        let mut run_on = RunOn::new(first, broken, 4).unwrap();
        let mut buf = vec![0.0; 20 * 3];
        assert_eq!(fill_rows(&mut run_on, &mut buf).unwrap(), 5);
        assert_eq!(run_on.read_rows(&mut buf).unwrap(), 0);
    }

    // 8-bit files give byte reads, run on as the f32 reads are; a source without
    // them turns them off.
    #[test]
    fn byte_reads_run_on_when_both_recordings_have_them() {
        use crate::obs::{Container, create, open};
        let dir = tempfile::tempdir().unwrap();
        let mut a = test_header(4, 6);
        a.nbits = 8;
        let mut b = a.clone();
        b.start = a.epoch_of_sample(6.0);
        b.n_samples = 9;
        let (pa, pb) = (dir.path().join("a.json"), dir.path().join("b.json"));
        for (path, h, base) in [(&pa, &a, 0.0), (&pb, &b, 100.0)] {
            let mut w = create(path, h, Container::Native).unwrap();
            let n = h.n_samples as usize * 4;
            w.write_rows(&(0..n).map(|i| base + i as f32).collect::<Vec<_>>())
                .unwrap();
            w.finish().unwrap();
        }
        let mut run_on = RunOn::new(open(&pa).unwrap(), open(&pb).unwrap(), 2).unwrap();
        let reader = run_on.byte_rows().unwrap();
        let (mut out, mut got) = (vec![0u8; 5 * 4], Vec::new());
        loop {
            let n = reader.read_byte_rows(&mut out).unwrap();
            if n == 0 {
                break;
            }
            got.extend_from_slice(&out[..n * 4]);
        }
        assert_eq!(got, (0..24).chain(100..108).collect::<Vec<u8>>());
        let floats = Box::new(MemorySource::new(a.clone(), vec![0.0; 24]));
        let mut mixed = RunOn::new(floats, open(&pb).unwrap(), 2).unwrap();
        assert!(mixed.byte_rows().is_none());
    }
}
