"""Field data from CSV: failure times with suspension flags and binned counts, with every
problem reported by its line in the file (engine.field_io).

The expected values are the files' own contents, written out by hand here; the
CSV reading itself follows RFC 4180 (quoted fields may contain the delimiter).
"""
import pytest

import lifedraw
from lifedraw.engine import ModelError, Target
from lifedraw.engine.field_io import MAX_REPORTED, FieldDataError, read_binned_csv, read_failure_csv, sniff_layout


# ---- failure times -------------------------------------------------------------------------

def test_failure_times_and_flags_are_read_in_file_order():
    times, censored = read_failure_csv("time,suspended\n5200,0\n8100,0\n9400,1\n11800,0\n")
    assert times.tolist() == [5200.0, 8100.0, 9400.0, 11800.0]
    assert censored.tolist() == [False, False, True, False]


@pytest.mark.parametrize("flag", ["1", "true", "TRUE", "yes", "Y", "s", "S", "suspended", "censored", "C"])
def test_each_documented_suspension_spelling_marks_a_suspension(flag):
    _, censored = read_failure_csv(f"time,suspended\n100,0\n200,{flag}\n")
    assert censored.tolist() == [False, True]


@pytest.mark.parametrize("flag", ["0", "false", "False", "no", "N", "f", "F", "failed", "failure"])
def test_each_documented_failure_spelling_marks_a_failure(flag):
    _, censored = read_failure_csv(f"age,status\n100,{flag}\n200,S\n")
    assert censored.tolist() == [False, True]


def test_without_a_flag_column_every_row_is_a_failure():
    times, censored = read_failure_csv("time (hours)\n3\n1\n2\n")
    assert times.tolist() == [3.0, 1.0, 2.0]
    assert not censored.any()


def test_columns_may_come_in_any_order_with_extra_columns_ignored():
    text = "unit,Suspended,Time_h,site\nA7,no,120.5,north\nB2,yes,300,south\n"
    times, censored = read_failure_csv(text)
    assert times.tolist() == [120.5, 300.0]
    assert censored.tolist() == [False, True]


def test_semicolon_files_and_a_utf8_byte_order_mark_are_accepted():
    data = "\ufefftime;suspended\n10;0\n20;1\n".encode("utf-8")
    times, censored = read_failure_csv(data)
    assert times.tolist() == [10.0, 20.0]
    assert censored.tolist() == [False, True]


def test_quoted_fields_follow_rfc_4180():
    times, censored = read_failure_csv('time,suspended\n"5200","no"\n"8100","yes"\n')
    assert times.tolist() == [5200.0, 8100.0]
    assert censored.tolist() == [False, True]


def test_a_path_is_read_from_disk(tmp_path):
    path = tmp_path / "bushings.csv"
    path.write_text("time,suspended\n5200,0\n8100,1\n", encoding="utf-8")
    times, censored = read_failure_csv(path)
    assert times.tolist() == [5200.0, 8100.0]
    assert censored.tolist() == [False, True]


def test_a_time_that_is_not_a_number_is_reported_by_its_line():
    with pytest.raises(FieldDataError) as info:
        read_failure_csv("time,suspended\n5200,0\nabc,1\n")
    assert info.value.field == "row 3"
    assert "'abc' is not a number" in info.value.reason


def test_a_negative_time_is_reported_by_its_line():
    with pytest.raises(FieldDataError) as info:
        read_failure_csv("time,suspended\n5200,0\n8100,0\n-4,0\n")
    assert info.value.field == "row 4"
    assert "negative" in info.value.reason


def test_a_flag_that_is_not_understood_is_reported_with_the_accepted_spellings():
    with pytest.raises(FieldDataError) as info:
        read_failure_csv("time,suspended\n5200,maybe\n")
    assert info.value.field == "row 2"
    assert "'maybe' not understood" in info.value.reason
    assert "1/0, true/false, yes/no or F/S" in info.value.reason


def test_a_missing_value_is_reported():
    with pytest.raises(FieldDataError) as info:
        read_failure_csv("time,suspended\n5200\n")
    assert info.value.field == "row 2"
    assert "missing" in info.value.reason


def test_line_numbers_count_comment_and_blank_lines():
    text = "# exported from the overhaul log\ntime,suspended\n\n5200,0\nx,0\n"
    with pytest.raises(FieldDataError) as info:
        read_failure_csv(text)
    assert info.value.field == "row 5"


def test_several_bad_rows_are_reported_together():
    text = "time,suspended\n1,0\nx,0\n3,maybe\n-1,0\n5,1\n"
    with pytest.raises(FieldDataError) as info:
        read_failure_csv(text)
    assert [line for line, _ in info.value.problems] == [3, 4, 5]
    assert str(info.value).startswith("row 3: ")
    assert "row 4: " in str(info.value) and "row 5: " in str(info.value)


def test_at_most_ten_rows_are_listed_and_the_rest_are_counted():
    text = "time\n" + "bad\n" * 14
    with pytest.raises(FieldDataError) as info:
        read_failure_csv(text)
    assert len(info.value.problems) == MAX_REPORTED == 10
    assert info.value.more == 4
    assert "and 4 more bad rows" in str(info.value)


def test_a_header_without_an_age_column_is_refused():
    with pytest.raises(ModelError) as info:
        read_failure_csv("unit,flag\nA,0\n")
    assert info.value.field == "header"


def test_a_file_of_only_suspensions_is_refused():
    with pytest.raises(ModelError) as info:
        read_failure_csv("time,suspended\n10,1\n20,1\n")
    assert info.value.field == "file"


def test_failure_data_builds_the_product_limit_model():
    # Kaplan & Meier (1958): with suspensions at 2 and 4 among 1..5, S(1) = 4/5,
    # S(3) = 4/5 * 2/3, S(5) = 0 (worked by hand from the product-limit formula).
    times, censored = read_failure_csv("time,suspended\n1,0\n2,1\n3,0\n4,1\n5,0\n")
    target = lifedraw.failure_times(times, censored)
    assert target.sf(1.5) == pytest.approx(4 / 5)
    assert target.sf(3.5) == pytest.approx(4 / 5 * 2 / 3)


# ---- binned counts ---------------------------------------------------------------------------

def test_contiguous_bins_give_edges_and_counts():
    edges, counts = read_binned_csv("lower,upper,count\n0,3,14\n3,6,6\n6,9,5\n")
    assert edges.tolist() == [0.0, 3.0, 6.0, 9.0]
    assert counts.tolist() == [14.0, 6.0, 5.0]


def test_a_gap_between_bins_is_reported_by_its_line():
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("lower,upper,count\n0,3,14\n4,6,6\n")
    assert info.value.field == "row 3"
    assert "gap between bins" in info.value.reason
    assert "starts at 4" in info.value.reason and "ends at 3" in info.value.reason


def test_overlapping_bins_are_reported():
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("lower,upper,count\n0,3,14\n2,6,6\n")
    assert "bins overlap" in info.value.reason


def test_an_upper_end_not_above_the_lower_end_is_reported():
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("lower,upper,count\n0,3,14\n3,3,6\n")
    assert info.value.field == "row 3"
    assert "not above" in info.value.reason


def test_a_negative_count_is_reported():
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("from,to,failures\n0,3,-2\n")
    assert info.value.field == "row 2"
    assert "negative" in info.value.reason


def test_a_count_that_is_not_a_number_is_reported():
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("lower,upper,count\n0,3,many\n")
    assert "'many' is not a number" in info.value.reason


def test_one_misplaced_bin_is_reported_once():
    # Row 3 starts late; row 4 continues from row 3's end, so only row 3 is wrong.
    with pytest.raises(FieldDataError) as info:
        read_binned_csv("lower,upper,count\n0,3,1\n4,6,1\n6,9,1\n")
    assert [line for line, _ in info.value.problems] == [3]


def test_a_binned_header_without_count_is_refused():
    with pytest.raises(ModelError) as info:
        read_binned_csv("lower,upper\n0,3\n")
    assert info.value.field == "header"
    assert "count" in info.value.reason


def test_binned_data_builds_the_histogram_model():
    edges, counts = read_binned_csv("lower,upper,count\n0,3,14\n3,6,6\n")
    target = lifedraw.binned_counts(edges, counts)
    # Uniform within bins: F(3) = 14/20 and F(4.5) = 14/20 + 3/6 exactly (by hand).
    assert target.cdf(3.0) == pytest.approx(0.7)
    assert target.cdf(4.5) == pytest.approx(0.7 + 0.5 * 0.3)


def test_the_layout_is_recognised_from_the_header():
    assert sniff_layout("lower,upper,count\n0,1,2\n") == "binned"
    assert sniff_layout("time,suspended\n1,0\n") == "failures"
