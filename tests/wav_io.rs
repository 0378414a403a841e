//! WAV round trips for the four accepted encodings, plain and extensible headers, and channel
//! mapping in 4-channel files (RIFF/WAVE as specified by Microsoft's multimedia docs; hound decodes).

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::io::Write;

use tapgrid::acquire::wav::{SampleEncoding, read_two_channels, write_channels};

fn ramp(n: usize, bits: u32, k: i64) -> Vec<f64> {
    // Values exactly representable in `bits`: integers / 2^(bits-1).
    let full = (1i64 << (bits - 1)) as f64;
    (0..n as i64)
        .map(|i| (((i * k) % (2 * full as i64 - 1)) - (full as i64 - 1)) as f64 / full)
        .collect()
}

#[test]
fn round_trip_all_encodings() {
    let dir = tempfile::tempdir().unwrap();
    for (enc, bits) in [
        (SampleEncoding::Int16, 16),
        (SampleEncoding::Int24, 24),
        (SampleEncoding::Int32, 32),
        (SampleEncoding::Float32, 24),
    ] {
        let a = ramp(5000, bits, 7919);
        let b = ramp(5000, bits, 104_729);
        let p = dir.path().join(format!("{enc:?}.wav"));
        write_channels(&p, 44_100, enc, &[&a, &b]).unwrap();
        let r = read_two_channels(&p, 0, 1).unwrap();
        assert_eq!(r.info.sample_rate_hz, 44_100);
        assert_eq!(r.info.encoding, enc);
        assert_eq!(r.a, a, "{enc:?} channel A");
        assert_eq!(r.b, b, "{enc:?} channel B");
    }
}

#[test]
fn four_channel_mapping() {
    let dir = tempfile::tempdir().unwrap();
    let chans: Vec<Vec<f64>> = (0..4)
        .map(|c| vec![(c as f64 + 1.0) * 0.125; 100])
        .collect();
    let refs: Vec<&[f64]> = chans.iter().map(|c| c.as_slice()).collect();
    let p = dir.path().join("four.wav");
    write_channels(&p, 48_000, SampleEncoding::Int24, &refs).unwrap();
    let r = read_two_channels(&p, 3, 1).unwrap();
    assert_eq!(r.info.channels, 4);
    assert!(r.a.iter().all(|&v| v == 0.5) && r.b.iter().all(|&v| v == 0.25));
    let r = read_two_channels(&p, 2, 0).unwrap();
    assert!(r.a.iter().all(|&v| v == 0.375) && r.b.iter().all(|&v| v == 0.125));
    let e = read_two_channels(&p, 0, 4).unwrap_err();
    assert!(e.to_string().contains("out of range"), "{e}");
}

/// Writes a WAV by hand: `extensible` chooses WAVE_FORMAT_EXTENSIBLE (0xFFFE) with the PCM or
/// IEEE-float sub-format GUID, else a plain WAVEFORMAT (tag 1 or 3).
fn hand_wav(path: &std::path::Path, bits: u16, float: bool, extensible: bool, frames: &[[i64; 2]]) {
    let ch = 2u16;
    let bps = bits / 8;
    let mut data = Vec::new();
    for f in frames {
        for &s in f {
            if float {
                data.extend_from_slice(&((s as f32) / 1000.0).to_le_bytes());
            } else {
                data.extend_from_slice(&s.to_le_bytes()[..bps as usize]);
            }
        }
    }
    let mut fmt = Vec::new();
    let tag: u16 = if extensible {
        0xFFFE
    } else if float {
        3
    } else {
        1
    };
    fmt.extend_from_slice(&tag.to_le_bytes());
    fmt.extend_from_slice(&ch.to_le_bytes());
    fmt.extend_from_slice(&48_000u32.to_le_bytes());
    fmt.extend_from_slice(&(48_000u32 * (ch * bps) as u32).to_le_bytes());
    fmt.extend_from_slice(&(ch * bps).to_le_bytes());
    fmt.extend_from_slice(&bits.to_le_bytes());
    if extensible {
        fmt.extend_from_slice(&22u16.to_le_bytes());
        fmt.extend_from_slice(&bits.to_le_bytes());
        fmt.extend_from_slice(&3u32.to_le_bytes()); // front left | front right
        let sub: u16 = if float { 3 } else { 1 };
        fmt.extend_from_slice(&sub.to_le_bytes());
        fmt.extend_from_slice(&[
            0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
        ]);
    }
    let mut out = Vec::new();
    out.extend_from_slice(b"RIFF");
    out.extend_from_slice(&((4 + 8 + fmt.len() + 8 + data.len()) as u32).to_le_bytes());
    out.extend_from_slice(b"WAVEfmt ");
    out.extend_from_slice(&(fmt.len() as u32).to_le_bytes());
    out.extend_from_slice(&fmt);
    out.extend_from_slice(b"data");
    out.extend_from_slice(&(data.len() as u32).to_le_bytes());
    out.extend_from_slice(&data);
    std::fs::File::create(path)
        .unwrap()
        .write_all(&out)
        .unwrap();
}

#[test]
fn plain_and_extensible_headers_decode_alike() {
    let dir = tempfile::tempdir().unwrap();
    let frames = [[1000i64, -2000], [-4_194_304, 4_194_303], [0, 1]];
    for bits in [16u16, 24, 32] {
        let fr: Vec<[i64; 2]> = frames
            .iter()
            .map(|f| [f[0] >> (24 - bits.min(24)), f[1] >> (24 - bits.min(24))])
            .collect();
        let p1 = dir.path().join(format!("plain{bits}.wav"));
        let p2 = dir.path().join(format!("ext{bits}.wav"));
        hand_wav(&p1, bits, false, false, &fr);
        hand_wav(&p2, bits, false, true, &fr);
        let (r1, r2) = (
            read_two_channels(&p1, 0, 1).unwrap(),
            read_two_channels(&p2, 0, 1).unwrap(),
        );
        assert_eq!(r1.a, r2.a);
        assert_eq!(r1.b, r2.b);
        let full = (1i64 << (bits - 1)) as f64;
        assert_eq!(
            r1.a[0],
            fr[0][0] as f64 / full,
            "{bits}-bit scaling to full scale"
        );
    }
    let p1 = dir.path().join("plainf.wav");
    let p2 = dir.path().join("extf.wav");
    hand_wav(&p1, 32, true, false, &[[500, -250]]);
    hand_wav(&p2, 32, true, true, &[[500, -250]]);
    let (r1, r2) = (
        read_two_channels(&p1, 0, 1).unwrap(),
        read_two_channels(&p2, 0, 1).unwrap(),
    );
    assert_eq!((r1.a[0], r1.b[0]), (0.5, -0.25));
    assert_eq!((r2.a[0], r2.b[0]), (0.5, -0.25));
}

#[test]
fn extra_chunks_before_the_data_are_skipped() {
    // RIFF readers must skip unknown chunks (e.g. LIST/INFO written by recording software).
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("plain.wav");
    hand_wav(&p, 16, false, false, &[[1000, -2000], [3000, -4000]]);
    let mut b = std::fs::read(&p).unwrap();
    let fmt_end = 12 + 8 + u32::from_le_bytes(b[16..20].try_into().unwrap()) as usize;
    let list: Vec<u8> = [b"LIST".as_slice(), &10u32.to_le_bytes(), b"INFOab\0\0xy"].concat();
    b.splice(fmt_end..fmt_end, list.iter().copied());
    let riff = (b.len() - 8) as u32;
    b[4..8].copy_from_slice(&riff.to_le_bytes());
    let q = dir.path().join("list.wav");
    std::fs::write(&q, &b).unwrap();
    let (r1, r2) = (
        read_two_channels(&p, 0, 1).unwrap(),
        read_two_channels(&q, 0, 1).unwrap(),
    );
    assert_eq!(r1.a, r2.a);
    assert_eq!(r1.b, r2.b);
    assert_eq!(r2.a[1], 3000.0 / 32768.0);
}
