//! Fuzz target: the stills loader. The input is split into up to four chunks (at each 0xFF
//! 0x00 0xFF 0x00 marker), each written as a numbered still whose extension comes from the
//! chunk's first byte; the folder is opened and every frame read. Errors are fine; panics
//! and frames of the wrong size are not.
#![no_main]

use libfuzzer_sys::fuzz_target;
use twistmark::decode::{self, Frame, Luma};

const EXTS: [&str; 4] = ["png", "bmp", "tif", "jpg"];

fuzz_target!(|data: &[u8]| {
    let dir = tempfile::tempdir().expect("temp dir");
    let mut chunks = Vec::new();
    let mut rest = data;
    while chunks.len() < 3 {
        match rest.windows(4).position(|w| w == [0xFF, 0x00, 0xFF, 0x00]) {
            Some(p) => {
                chunks.push(&rest[..p]);
                rest = &rest[p + 4..];
            }
            None => break,
        }
    }
    chunks.push(rest);
    for (i, c) in chunks.iter().enumerate() {
        let (ext, body) = match c.split_first() {
            Some((b, body)) => (EXTS[usize::from(*b) % EXTS.len()], body),
            None => ("png", *c),
        };
        std::fs::write(dir.path().join(format!("f_{i}.{ext}")), body).expect("write");
    }
    let mut src = match decode::open(dir.path()) {
        Ok(s) => s,
        // A message may hold a newline from the image decoder's own text (found by this
        // target); the binary prints every error on one line (src/main.rs).
        Err(_) => return,
    };
    let (w, h) = (src.info().width, src.info().height);
    let mut f = Frame::empty();
    for _ in 0..8 {
        match src.read_into(&mut f) {
            Ok(true) => {
                assert_eq!((f.width, f.height), (w, h));
                let n = w as usize * h as usize;
                match &f.luma {
                    Luma::U8(d) => assert_eq!(d.len(), n),
                    Luma::U16(d) => assert_eq!(d.len(), n),
                }
            }
            Ok(false) => break,
            Err(_) => break,
        }
    }
});
