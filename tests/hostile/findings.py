"""Contract breaks found by the hostile-input suite, with their status (read by tools/hostile_report).

Each entry: the fuzz target (or check) that found it, the exact input, what escaped, where, the status
("fixed": a guard landed and the regression test passes; "open": the regression test is a strict xfail and the
owner of the module has the exact input), and the regression test in test_found_inputs.py / test_images.py /
test_limits.py.
"""

FINDINGS = [
    {"target": "band_spec", "input": "'300:1e308:1e-308'", "escaped": "OverflowError",
     "where": "matgen/spectra/bands.py BandSet.regular", "status": "fixed",
     "test": "test_found_inputs.py::test_band_spec_with_overflowing_count_is_band_error"},
    {"target": "bands_json", "input": '{"centre_nm": ["a"], ...} and ragged lists [[1], [2, 3]]',
     "escaped": "ValueError", "where": "matgen/spectra/bands.py BandSet.from_dict", "status": "fixed",
     "test": "test_found_inputs.py::test_band_table_with_non_numeric_entries_is_band_error"},
    {"target": "relative_path", "input": "'\\x00aps/melanin.exr'", "escaped": "ValueError (embedded null byte)",
     "where": "matgen/fsutil.py resolve_inside", "status": "fixed",
     "test": "test_found_inputs.py::test_path_with_nul_byte_is_path_error"},
    {"target": "forged_maps", "input": "any bake: read_text_limited read(ceiling + 1) per config",
     "escaped": "64 MiB reserved per small text file (tracemalloc peak)", "where": "matgen/limits.py",
     "status": "fixed", "test": "test_limits.py::test_reading_a_small_text_file_does_not_reserve_the_ceiling"},
    {"target": "forged_maps", "input": "40-channel EXR under image_channels=8",
     "escaped": "declared channel count never checked", "where": "matgen/bake/maps.py map_info",
     "status": "fixed", "test": "test_images.py::test_many_channel_map_with_lowered_channel_ceiling"},
    {"target": "stack_fields", "input": "Stack(..., names=5)", "escaped": "TypeError",
     "where": "matgen/transport/stack.py Stack.__post_init__", "status": "open",
     "test": "test_found_inputs.py::test_stack_names_not_a_sequence_is_stack_error"},
    {"target": "table_npz", "input": "member header.json.npy with deflated bytes overwritten by b'\\xff' * 8",
     "escaped": "zlib.error", "where": "matgen/tables/store.py Table.load", "status": "fixed",
     "test": "test_found_inputs.py::test_table_with_corrupt_deflate_stream_is_table_error"},
    {"target": "table_npz", "input": "central-directory compression method 99",
     "escaped": "NotImplementedError", "where": "matgen/tables/store.py Table.load", "status": "fixed",
     "test": "test_found_inputs.py::test_table_with_unknown_compression_method_is_table_error"},
    {"target": "table_header", "input": "header JSON without 'working_space'", "escaped": "KeyError",
     "where": "matgen/tables/store.py Table.load", "status": "fixed",
     "test": "test_found_inputs.py::test_table_header_without_working_space_is_table_error"},
    {"target": "table_header", "input": "header JSON '[]'", "escaped": "AttributeError",
     "where": "matgen/tables/store.py Table.load", "status": "fixed",
     "test": "test_found_inputs.py::test_table_header_not_an_object_is_table_error"},
    {"target": "table_manifest", "input": "t.json holding '-1'", "escaped": "AttributeError",
     "where": "matgen/tables/store.py Table.load", "status": "fixed",
     "test": "test_found_inputs.py::test_table_manifest_not_an_object_is_table_error"},
    {"target": "table_declared_shape", "input": "member .npy header with shape '(2*'",
     "escaped": "tokenize.TokenError", "where": "matgen/tables/store.py read_npz_checked", "status": "fixed",
     "test": "test_found_inputs.py::test_table_member_with_unparsable_shape_is_table_error"},
    {"target": "map_exr", "input": "EXR with attribute type 'chlist' overwritten by b'ch\\xc9ist'",
     "escaped": "UnicodeDecodeError from oiio.geterror()", "where": "matgen/bake/maps.py map_info",
     "status": "open", "test": "test_found_inputs.py::test_exr_with_non_utf8_attribute_type_is_image_error"},
    {"target": "photon_records", "input": "one stored byte of 'weight.npy' flipped (bad CRC)",
     "escaped": "zipfile.BadZipFile", "where": "matgen/transport/records.py PhotonRecords.load", "status": "fixed",
     "test": "test_found_inputs.py::test_records_file_with_bad_crc_is_data_error"},
    {"target": "photon_records", "input": "'weight.npy' declaring shape (10**11,) with 16 bytes of data",
     "escaped": "numpy _ArrayMemoryError (373 GiB requested)", "where": "matgen/transport/records.py "
     "PhotonRecords.load", "status": "open",
     "test": "test_found_inputs.py::test_records_file_declaring_huge_arrays_is_refused_before_allocation"},
    {"target": "crash_safety", "input": "np.savez failing midway in PhotonRecords.save",
     "escaped": "partial rec.npz left at the destination", "where": "matgen/transport/records.py "
     "PhotonRecords.save", "status": "open",
     "test": "test_found_inputs.py::test_records_save_failing_midway_leaves_no_partial_file"},
    {"target": "table_declared_shape", "input": "member .npy shape (-99999999999999999999999999998999999999991, 3)",
     "escaped": "OverflowError", "where": "matgen/tables/store.py read_npz_checked", "status": "fixed",
     "test": "test_found_inputs.py::test_table_member_with_huge_negative_dimension_is_table_error"},
]
