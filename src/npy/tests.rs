//! Tests of the .npy codec: header layout, lenient parsing, every error, round trips.

use super::*;
use proptest::prelude::*;

/// A file with `text` as its header, unpadded, as another writer might produce it.
fn with_header(major: u8, text: &str, data: &[u8]) -> Vec<u8> {
    let mut file = MAGIC.to_vec();
    file.extend_from_slice(&[major, 0]);
    if major == 1 {
        file.extend_from_slice(&(text.len() as u16).to_le_bytes());
    } else {
        file.extend_from_slice(&(text.len() as u32).to_le_bytes());
    }
    file.extend_from_slice(text.as_bytes());
    file.extend_from_slice(data);
    file
}

fn read_err(file: &[u8]) -> String {
    read_npy(file).unwrap_err().to_string()
}

#[test]
fn header_of_a_1d_array_is_byte_exact() {
    // Source: numpy.lib.format (magic, version 1.0, u16 LE length, dict, spaces, `\n`,
    // 64-byte alignment); numpy.save writes the same 128 bytes for np.zeros(3, '<u4').
    let dict = "{'descr': '<u4', 'fortran_order': False, 'shape': (3,), }";
    let mut expected = b"\x93NUMPY\x01\x00\x76\x00".to_vec();
    expected.extend_from_slice(dict.as_bytes());
    expected.resize(127, b' ');
    expected.push(b'\n');
    assert_eq!(header_bytes("<u4", &[3]), expected);
}

#[test]
fn shapes_print_as_python_tuples() {
    // Source: numpy.lib.format — the shape is a tuple: `()`, `(N,)`, `(A, B)`.
    for (shape, text) in [(vec![], "()"), (vec![7], "(7,)"), (vec![2, 3], "(2, 3)")] {
        let header = header_bytes("|u1", &shape);
        let dict = std::str::from_utf8(&header[V1_PREFIX..]).unwrap();
        assert!(dict.contains(&format!("'shape': {text}, }}")), "{dict}");
        assert_eq!(header.len() % ALIGN, 0);
        assert_eq!(header.last(), Some(&b'\n'));
    }
}

#[test]
fn a_header_too_long_for_u16_uses_version_2() {
    let shape = vec![1u64; 22_000];
    let mut file = header_bytes("<u4", &shape);
    assert_eq!(&file[6..8], &[2, 0]);
    assert_eq!(file.len() % ALIGN, 0);
    file.extend_from_slice(&7u32.to_le_bytes());
    let (header, data) = read_npy(&file).unwrap();
    assert_eq!(header.shape, shape);
    assert_eq!(data, &7u32.to_le_bytes());
}

#[test]
fn loose_dicts_are_accepted() {
    let data = [0u8; 12];
    for text in [
        "{\"shape\": (2L, 3 ,) ,'fortran_order':False,  \"descr\":'<i2'}\n",
        "{'descr': '<i2', 'fortran_order': False, 'shape': (2, 3)}",
        "  { 'fortran_order' : False , 'shape' : ( 6 ) , 'descr' : '<i2' , }   \n",
    ] {
        let file = with_header(1, text, &data);
        let (header, body) = read_npy(&file).unwrap();
        assert_eq!(header.descr, "<i2", "{text}");
        assert!(!header.fortran_order);
        assert_eq!(header.shape.iter().product::<u64>(), 6, "{text}");
        assert_eq!(body.len(), 12);
    }
}

#[test]
fn versions_2_and_3_use_a_u32_length() {
    let text = "{'descr': '|u1', 'fortran_order': False, 'shape': (2,), }\n";
    for major in [2, 3] {
        let file = with_header(major, text, &[5, 6]);
        assert_eq!(read_npy(&file).unwrap().1, &[5, 6]);
    }
}

#[test]
fn fortran_order_is_refused_only_where_it_matters() {
    let two_d = "{'descr': '|u1', 'fortran_order': True, 'shape': (2, 2), }";
    assert_eq!(
        read_err(&with_header(1, two_d, &[0; 4])),
        "fortran_order=True is not supported for a 2-d array (save it in C order)"
    );
    let one_d = "{'descr': '|u1', 'fortran_order': True, 'shape': (4,), }";
    assert!(
        read_npy(&with_header(1, one_d, &[0; 4]))
            .unwrap()
            .0
            .fortran_order
    );
}

#[test]
fn data_size_must_match_the_shape() {
    let text = "{'descr': '<u4', 'fortran_order': False, 'shape': (1000,), }";
    assert_eq!(
        read_err(&with_header(1, text, &[0; 3996])),
        "truncated: header says 1000 elements of 4 bytes (4000 bytes) but 3996 bytes follow"
    );
    assert_eq!(
        read_err(&with_header(1, text, &[0; 4001])),
        "wrong size: header says 1000 elements of 4 bytes (4000 bytes) but 4001 bytes follow"
    );
    let huge = "{'descr': '<u8', 'fortran_order': False, 'shape': (4294967296, 4294967296), }";
    assert!(matches!(
        read_npy(&with_header(1, huge, &[])),
        Err(NpyError::Overflow { .. })
    ));
}

#[test]
fn bad_preambles_are_named() {
    assert_eq!(
        read_err(b"PK\x03\x04 not npy"),
        "not a .npy file (bad magic)"
    );
    assert_eq!(
        read_err(b"\x93NUMPY\x01"),
        "not a .npy file (7 bytes, shorter than the 10-byte preamble)"
    );
    assert_eq!(
        read_err(b"\x93NUMPY\x02\x00\x01\x00"),
        "not a .npy file (10 bytes, shorter than the 12-byte preamble)"
    );
    assert_eq!(
        read_err(b"\x93NUMPY\x01\x01\x00\x00"),
        "unsupported .npy version 1.1 (1.0, 2.0 and 3.0 are read)"
    );
    assert_eq!(
        read_err(b"\x93NUMPY\x01\x00\x40\x00{}"),
        "truncated header: its length says 64 bytes but 2 bytes follow"
    );
}

#[test]
fn bad_dicts_are_named() {
    let cases = [
        ("{'descr': '<c8', 'fortran_order': False, 'shape': (1,), }", "unsupported dtype `<c8`"),
        (
            "{'descr': [('a', '<i4')], 'fortran_order': False, 'shape': (1,), }",
            "unsupported dtype `[('a', '<i4')]`",
        ),
        (
            "{'descr': '|u1', 'shape': (1,), }",
            "bad .npy header: the header has no `fortran_order` key",
        ),
        (
            "{'descr': '|u1', 'fortran_order': False, 'shape': (1,), 'x': 1}",
            "bad .npy header: unexpected key `x` at byte 56 of the header",
        ),
        (
            "{'descr': '|u1', 'descr': '|u1', }",
            "bad .npy header: key `descr` appears twice at byte 17 of the header",
        ),
        (
            "{'descr': '|u1', 'fortran_order': 0, 'shape': (1,), }",
            "bad .npy header: fortran_order `0` is not True or False at byte 35 of the header",
        ),
        (
            "{'descr': '|u1', 'fortran_order': False, 'shape': (1,), } x",
            "bad .npy header: text after the closing `}` at byte 58 of the header",
        ),
        ("{'descr: '|u1'}", "bad .npy header: expected `:` at byte 10 of the header"),
        (
            "{'descr': '|u1', 'fortran_order': False, 'shape': (1,,), }",
            "bad .npy header: expected a dimension at byte 53 of the header",
        ),
        (
            "{'descr': '|u1', 'fortran_order': False, 'shape': (-1,), }",
            "bad .npy header: expected a dimension at byte 51 of the header",
        ),
        (
            "{'descr': '|u1', 'fortran_order': False, 'shape': (99999999999999999999,), }",
            "bad .npy header: dimension 99999999999999999999 does not fit in 64 bits at byte 51 of the header",
        ),
        ("{'descr': '|u1", "bad .npy header: unterminated string at byte 14 of the header"),
    ];
    for (text, message) in cases {
        assert_eq!(read_err(&with_header(1, text, &[0])), message, "{text}");
    }
}

#[test]
fn itemsize_comes_from_the_descr() {
    // Source: numpy.lib.format / NumPy dtype strings: order char, kind char, item size.
    for (descr, size) in [
        ("|u1", 1),
        ("|b1", 1),
        ("|?", 1),
        (">i2", 2),
        ("<u4", 4),
        ("<f8", 8),
    ] {
        assert_eq!(itemsize(descr), Ok(size), "{descr}");
    }
    for descr in [
        "u4", "<u3", "<f16", "<U10", "|O", "<M8", "", "<", "<u", "<u4x",
    ] {
        assert_eq!(
            itemsize(descr),
            Err(NpyError::Dtype(descr.to_string())),
            "{descr}"
        );
    }
}

#[test]
fn write_npy_refuses_data_that_does_not_fit_the_shape() {
    let mut out = Vec::new();
    let err = write_npy(&mut out, "<u2", &[3], &[0; 5]).unwrap_err();
    assert_eq!(err.kind(), io::ErrorKind::InvalidInput);
    assert!(out.is_empty());
    write_npy(&mut out, "<u2", &[3], &[1; 6]).unwrap();
    assert_eq!(out, [header_bytes("<u2", &[3]), vec![1; 6]].concat());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn header_round_trips(
        descr in prop::sample::select(vec!["|u1", "|i1", "|b1", "<u2", ">i2", "<u4", "<i8", "<f4", ">f8"]),
        shape in prop::collection::vec(0u64..6, 0..4),
        seed in any::<u8>(),
    ) {
        let len = shape.iter().product::<u64>() * itemsize(descr).unwrap();
        let data: Vec<u8> = (0..len).map(|i| (i as u8).wrapping_mul(31) ^ seed).collect();
        let header = header_bytes(descr, &shape);
        prop_assert_eq!(header.len() % ALIGN, 0);
        let mut file = Vec::new();
        write_npy(&mut file, descr, &shape, &data).unwrap();
        prop_assert_eq!(&file[..header.len()], &header[..]);
        let (read, body) = read_npy(&file).unwrap();
        prop_assert_eq!(read, NpyHeader { descr: descr.to_string(), fortran_order: false, shape });
        prop_assert_eq!(body, &data[..]);
    }

    #[test]
    fn any_bytes_after_the_magic_give_an_answer(tail in prop::collection::vec(any::<u8>(), 0..200)) {
        let mut file = MAGIC.to_vec();
        file.extend_from_slice(&tail);
        if let Ok((header, data)) = read_npy(&file) {
            let elements: u64 = header.shape.iter().product();
            prop_assert_eq!(elements * itemsize(&header.descr).unwrap(), data.len() as u64);
        }
    }
}
