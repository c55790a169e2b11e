"""Malformed sweep files: each gives one clear SweepError naming the problem.

Every file is written here (invented content). SweepError is a TraceError (an unusable
measurement), so the command line reports it as one paragraph with exit status 2; the
last test checks that path with a stand-in subcommand that only reads the file. The
messages are matched with pytest.raises(..., match=...): each names the line or column,
the bad value and the remedy.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import pytest

from xcheck import cli
from xcheck.capture import sweep_csv, touchstone
from xcheck.capture.lcr_table import read_lcr_table
from xcheck.capture.sweep_csv import read_sweep_csv
from xcheck.capture.sweep_types import SweepError
from xcheck.capture.touchstone import read_touchstone
from xcheck.errors import TraceError, XcheckError

HEADER = "freq (Hz),|Z| (ohm),phase (deg)\n"
ROWS = ["1000,10.5,-80", "2000,6.25,-70", "3000,4.5,-55", "4000,3.75,-40",
        "5000,3.5,-25", "6000,3.4,-10", "7000,3.5,5", "8000,3.7,20"]


def write(tmp_path: Path, text: str | bytes, name: str = "sweep.csv") -> Path:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def csv_with(row_index: int, row: str) -> str:
    """HEADER and ROWS with row ``row_index`` replaced; data row k is on line k + 2."""
    rows = list(ROWS)
    rows[row_index] = row
    return HEADER + "\n".join(rows) + "\n"


def test_sweep_error_is_a_trace_error():
    assert issubclass(SweepError, TraceError) and issubclass(SweepError, XcheckError)


# ------------------------------------------------------------------ sweep CSV


def test_no_frequency_column(tmp_path):
    text = "time,|Z| (ohm),phase (deg)\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"no frequency column: the file has 'time'.*frequency_column="):
        read_sweep_csv(write(tmp_path, text))


def test_zero_frequency(tmp_path):
    with pytest.raises(SweepError, match=r"must be above 0 Hz: line 2 reads 0 Hz; remove a DC point"):
        read_sweep_csv(write(tmp_path, csv_with(0, "0,10.5,-80")))


def test_negative_frequency(tmp_path):
    with pytest.raises(SweepError, match=r"line 3 reads -2000 Hz"):
        read_sweep_csv(write(tmp_path, csv_with(1, "-2000,6.25,-70")))


def test_frequencies_out_of_order(tmp_path):
    with pytest.raises(SweepError, match=r"rise \(or fall\) steadily.*line 4 falls to 1500 Hz after "
                                         r"2000 Hz on line 3; sort the rows"):
        read_sweep_csv(write(tmp_path, csv_with(2, "1500,4.5,-55")))


def test_repeated_frequency(tmp_path):
    with pytest.raises(SweepError, match=r"line 4 repeats the 2000 Hz of line 3"):
        read_sweep_csv(write(tmp_path, csv_with(2, "2000,4.5,-55")))


def test_nan_and_infinite_cells(tmp_path):
    text = csv_with(1, "2000,nan,-70").replace("4.5,-55", "4.5,inf")
    with pytest.raises(SweepError, match=r"'\|Z\| \(ohm\)' \(index 1\) needs a finite number in every "
                                         r"row, but it is empty, NaN or infinite on line 3.*'phase "
                                         r"\(deg\)' \(index 2\).*line 4"):
        read_sweep_csv(write(tmp_path, text))


def test_empty_cell(tmp_path):
    with pytest.raises(SweepError, match=r"empty, NaN or infinite on line 5"):
        read_sweep_csv(write(tmp_path, csv_with(3, "4000,,-40")))


def test_unreadable_cell(tmp_path):
    with pytest.raises(SweepError, match=r"cannot read a number: line 3 reads '6.25 ohm'"):
        read_sweep_csv(write(tmp_path, csv_with(1, "2000,6.25 ohm,-70")))


def test_magnitude_unit_not_stated(tmp_path):
    text = "freq (Hz),|Z|,phase (deg)\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"does not say whether it is in dB or linear.*"
                                         r"magnitude_unit='dB' or 'linear'"):
        read_sweep_csv(write(tmp_path, text))


def test_magnitude_unit_not_stated_with_negative_values_hints_at_db(tmp_path):
    text = "freq (Hz),gain,phase (deg)\n1000,-3,-10\n2000,-6,-20\n3000,-9,-30\n"
    with pytest.raises(SweepError, match=r"negative values, so it is probably dB"):
        read_sweep_csv(write(tmp_path, text))


def test_phase_unit_not_stated(tmp_path):
    text = "freq (Hz),|Z| (ohm),phase\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"degrees or radians.*phase_unit='deg' or 'rad'"):
        read_sweep_csv(write(tmp_path, text))


def test_fewer_than_three_points(tmp_path):
    with pytest.raises(SweepError, match=r"only 2 data rows; a sweep needs at least 3 points"):
        read_sweep_csv(write(tmp_path, HEADER + "\n".join(ROWS[:2]) + "\n"))


def test_negative_linear_magnitude(tmp_path):
    with pytest.raises(SweepError, match=r"holds negative values \(line 3 reads -6.25\).*"
                                         r"magnitude_unit='dB'"):
        read_sweep_csv(write(tmp_path, csv_with(1, "2000,-6.25,-70")))


def test_unknown_and_ambiguous_units(tmp_path):
    text = "freq (mhz),|Z| (Mohm),phase (grad)\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"3 problems.*'mhz' is ambiguous \(millihertz or megahertz"
                                         r".*'Mohm' is ambiguous.*'megohm'.*unknown phase unit 'grad'"):
        read_sweep_csv(write(tmp_path, text))


def test_impedance_or_transfer_not_stated(tmp_path):
    text = "freq (Hz),mag (dB),phase (deg)\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"impedance or a transfer function.*quantity='impedance'"):
        read_sweep_csv(write(tmp_path, text))


def test_quantity_argument_against_the_header(tmp_path):
    with pytest.raises(SweepError, match=r"quantity='transfer' was given, but column .* unit of "
                                         r"impedance"):
        read_sweep_csv(write(tmp_path, HEADER + "\n".join(ROWS)), quantity="transfer")


def test_row_with_a_missing_field(tmp_path):
    with pytest.raises(SweepError, match=r"rows must have 3 fields.*line 4 has 2"):
        read_sweep_csv(write(tmp_path, csv_with(2, "3000,4.5")))


def test_frequency_in_the_wrong_unit_goes_beyond_a_terahertz(tmp_path):
    text = "freq (GHz),|Z| (ohm),phase (deg)\n" + "\n".join(ROWS)
    with pytest.raises(SweepError, match=r"beyond 1e\+12 Hz.*line 3 reads 2e\+12 Hz.*check the "
                                         r"column's unit"):
        read_sweep_csv(write(tmp_path, text))


def test_decibels_beyond_the_value_limit(tmp_path):
    text = "freq (Hz),|Z| (dB),phase (deg)\n1000,20,0\n2000,400,0\n3000,20,0\n"
    with pytest.raises(SweepError, match=r"the impedance goes beyond 1e\+15 ohm.*line 3 gives 1e\+20"):
        read_sweep_csv(write(tmp_path, text))


def test_real_and_imaginary_parts_in_db(tmp_path):
    text = "freq (Hz),Re (dB),Im (dB)\n1000,1,2\n2000,1,2\n3000,1,2\n"
    with pytest.raises(SweepError, match=r"cannot be in dB"):
        read_sweep_csv(write(tmp_path, text), quantity="impedance")


def test_magnitude_without_a_phase(tmp_path):
    text = "freq (Hz),|Z| (ohm)\n1000,1\n2000,2\n3000,3\n"
    with pytest.raises(SweepError, match=r"cannot find the values.*found magnitude '\|Z\| \(ohm\)'"):
        read_sweep_csv(write(tmp_path, text))


def test_binary_file(tmp_path):
    with pytest.raises(SweepError, match=r"looks like a binary file"):
        read_sweep_csv(write(tmp_path, bytes(range(256)) * 8, "sweep.bin"))


# ------------------------------------------------------------------ Touchstone

S1P = "! invented\n# MHz S RI R 50\n1 0.1 0.2\n2 0.1 0.25\n3 0.1 0.3\n4 0.1 0.35\n"


def test_touchstone_wrong_extension(tmp_path):
    with pytest.raises(SweepError, match=r"cannot tell the number of ports.*rename the file to .s1p"):
        read_touchstone(write(tmp_path, S1P, "sweep.txt"))


def test_touchstone_three_ports(tmp_path):
    with pytest.raises(SweepError, match=r"the file has 3 ports; xcheck reads one-port"):
        read_touchstone(write(tmp_path, S1P, "net.s3p"))


def test_touchstone_two_port_without_connection(tmp_path):
    text = "# MHz S RI R 50\n" + "".join(f"{f} 0 0 0.9 0 0.9 0 0 0\n" for f in (1, 2, 3))
    with pytest.raises(SweepError, match=r"two-port file: say how.*connection='shunt'"):
        read_touchstone(write(tmp_path, text, "net.s2p"))


def test_touchstone_connection_on_a_one_port(tmp_path):
    with pytest.raises(SweepError, match=r"connection applies to a two-port file"):
        read_touchstone(write(tmp_path, S1P, "dut.s1p"), connection="shunt")


def test_touchstone_line_with_too_few_numbers(tmp_path):
    text = S1P.replace("2 0.1 0.25", "2 0.1")
    with pytest.raises(SweepError, match=r"a 1-port data line holds 3 numbers.*line 4 has 2"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_unreadable_and_nan_values(tmp_path):
    text = S1P.replace("2 0.1 0.25", "2 0.1 O.25").replace("3 0.1 0.3", "3 NaN 0.3")
    with pytest.raises(SweepError, match=r"2 problems.*line 4 reads 'O.25'.*NaN or infinite values "
                                         r"on line 5"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_frequencies_out_of_order(tmp_path):
    text = S1P.replace("3 0.1 0.3", "1.5 0.1 0.3")
    with pytest.raises(SweepError, match=r"line 5 falls to 1500000 Hz after 2000000 Hz on line 4"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_complex_reference_impedance(tmp_path):
    pytest.importorskip("skrf")
    text = S1P.replace("R 50", "R 50+5j")
    with pytest.raises(SweepError, match=r"reference impedance must be one real, positive value"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_bad_option_line(tmp_path):
    pytest.importorskip("skrf")
    text = S1P.replace("# MHz S RI R 50", "# MHz S XY R 50")
    with pytest.raises(SweepError, match=r"scikit-rf cannot read it as Touchstone \(.*xy.*option line"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_open_circuit_point(tmp_path):
    pytest.importorskip("skrf")
    text = S1P.replace("3 0.1 0.3", "3 1 0")
    with pytest.raises(SweepError, match=r"S11 = 1 \(an open circuit: infinite impedance\) on line 5"):
        read_touchstone(write(tmp_path, text, "dut.s1p"))


def test_touchstone_missing_file(tmp_path):
    with pytest.raises(SweepError, match=r"nope\.s1p: 1 problem .* file not found"):
        read_touchstone(tmp_path / "nope.s1p")


def test_touchstone_fifo_is_refused_without_waiting(tmp_path):
    fifo = tmp_path / "pipe.s1p"
    os.mkfifo(fifo)  # a reader that waited for a writer would hang here
    with pytest.raises(SweepError, match=r"is a FIFO \(named pipe\), not a regular file"):
        read_touchstone(fifo)


def test_touchstone_over_the_size_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(touchstone, "SWEEP_MAX_BYTES", 64)
    with pytest.raises(SweepError, match=r"more than the 64 bytes accepted for a Touchstone file"):
        read_touchstone(write(tmp_path, S1P * 4, "dut.s1p"))


def test_sweep_csv_over_the_size_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(sweep_csv, "SWEEP_MAX_BYTES", 64)
    with pytest.raises(SweepError, match=r"holds more than 64 bytes of text"):
        read_sweep_csv(write(tmp_path, HEADER + "\n".join(ROWS)))


# ------------------------------------------------------------------ LCR table


def test_lcr_header_without_a_secondary_reading(tmp_path):
    with pytest.raises(SweepError, match=r"line 2 must be a header naming a secondary reading "
                                         r"\(ESR, Rs, Rp, D, Q"):
        read_lcr_table(write(tmp_path, "# invented\nfreq (Hz),Cs (nF),note\n1000,4.7,ok\n"))


def test_lcr_circuit_argument_against_the_header(tmp_path):
    with pytest.raises(SweepError, match=r"the header names a parallel circuit \('Cp'\) but "
                                         r"circuit='series'"):
        read_lcr_table(write(tmp_path, "f,Cp,D\n1k,1u,0.01\n"), circuit="series")


def test_lcr_negative_esr_and_capacitance(tmp_path):
    text = "f,Cs,ESR\n1k,1u,-0.1\n2k,-1u,0.1\n"
    with pytest.raises(SweepError, match=r"2 problems.*line 3: the capacitance reads -1e-06.*part is "
                                         r"inductive.*line 2: ESR reads -0.1.*open and short corrections"):
        read_lcr_table(write(tmp_path, text))


def test_lcr_impedance_magnitude_needs_the_reactance_sign(tmp_path):
    with pytest.raises(SweepError, match=r"inductive or capacitive; pass reactance="):
        read_lcr_table(write(tmp_path, "f,|Z|,Q\n1k,10,3\n"))


def test_lcr_esr_above_the_impedance_magnitude(tmp_path):
    with pytest.raises(SweepError, match=r"line 2: ESR = 12 ohm is above \|Z\| = 10 ohm"):
        read_lcr_table(write(tmp_path, "f,|Z|,ESR\n1k,10,12\n"), reactance="capacitive")


def test_lcr_upper_case_m_in_a_cell(tmp_path):
    with pytest.raises(SweepError, match=r"line 2, column 'Ls': '1M': an upper-case 'M' suffix"):
        read_lcr_table(write(tmp_path, "f,Ls,Q\n1k,1M,3\n"))


def test_lcr_repeated_frequency(tmp_path):
    with pytest.raises(SweepError, match=r"line 3 repeats the 1000 Hz of line 2.*average repeated"):
        read_lcr_table(write(tmp_path, "f,Cs,D\n1k,1u,0.01\n1000,1.01u,0.01\n"))


# ------------------------------------------------------------------ command line


def test_command_line_reports_a_sweep_error_with_exit_status_2(tmp_path, monkeypatch, printed):
    """The dispatcher's handling of XcheckError, exercised with a stand-in subcommand."""
    path = write(tmp_path, csv_with(2, "2000,4.5,-55"))

    def build_parser(argv=None) -> argparse.ArgumentParser:
        parser = argparse.ArgumentParser(prog="xcheck")
        parser.add_argument("sweep")
        parser.set_defaults(_run=lambda args: (read_sweep_csv(args.sweep), 0)[1])
        return parser

    monkeypatch.setattr(cli, "build_parser", build_parser)
    assert cli.main([str(path)]) == cli.EXIT_BAD_INPUT == 2
    err = printed().err
    assert err.startswith("xcheck: ") and "Traceback" not in err
    assert "problem in this frequency sweep" in err and "line 4 repeats" in err
