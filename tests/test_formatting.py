"""The one formatter: head names, percentages, points, weights, signed values, columns, counts."""

from __future__ import annotations

import math

import pytest

from inspector import formatting as fmt


def test_head_names_round_trip():
    """L{layer}H{head}, counted from 0, reads back to the same pair.

    Reference: the project's naming rule (DEVELOPERS.md); common practice, no source.
    """
    assert fmt.head_name(2, 3) == "L2H3"
    assert fmt.layer_name(11) == "L11"
    assert fmt.layer_name(2) + fmt.head_tick(3) == fmt.head_name(2, 3)
    for layer in range(0, 25, 7):
        for head in range(0, 17, 5):
            assert fmt.parse_head_name(fmt.head_name(layer, head)) == (layer, head)
    assert fmt.parse_head_name(" l10 h2 ") == (10, 2)
    for bad in ("layer 2", "L2", "H3", "L2Hx", ""):
        with pytest.raises(ValueError):
            fmt.parse_head_name(bad)


def test_percent_and_points():
    """Scores as percentages with one decimal; changes and tolerances in percentage points.

    Reference: arithmetic (0.854 = 85.4 %, a difference of 0.01 = 1 percentage point); common practice, no source.
    """
    assert fmt.percent(0.854) == "85.4%"
    assert fmt.percent(0.98712) == "98.7%"
    assert fmt.percent(1.0) == "100.0%"
    assert fmt.percent(float("nan")) == "n/a"
    assert fmt.percent(None) == "n/a"
    assert fmt.percent(0.2, 0) == "20%"
    assert fmt.points(0.01) == "1.0 point"
    assert fmt.points(0.025) == "2.5 points"
    assert fmt.points(-0.023, signed=True) == "\u22122.3 points"
    assert fmt.points(0.004, signed=True) == "+0.4 points"
    assert fmt.points(-0.0001, signed=True) == "0.0 points"


def test_weights_signed_and_numbers():
    """Fixed decimals for weights, an explicit sign for signed values, significant digits otherwise.

    Reference: Python's format mini-language (f, +f and g presentation types); common practice, no source.
    """
    assert fmt.weight(0.0803) == "0.080"
    assert fmt.signed(0.12) == "+0.120"
    assert fmt.signed(-0.045) == "\u22120.045"
    assert fmt.signed(-0.0000001) == "0.000"
    assert fmt.number(8.01e-05) == "8.01e-05"
    assert fmt.number(1.4201) == "1.42"
    assert fmt.signed(math.inf) == "\u221e"
    assert fmt.number(3.14e-7, sign=True) == "+3.14e-07"
    assert fmt.number(-0.25, sign=True) == "\u22120.25"
    assert fmt.number(0.0, sign=True) == "0"


def test_rank_correlations():
    """Spearman rho with its sign and two decimals; undefined ones read n/a.

    Reference: Spearman's rho lies in [-1, 1] (Spearman 1904); common practice, no source, for the display.
    """
    assert fmt.correlation(0.4249) == "+0.42"
    assert fmt.correlation(-0.1) == "\u22120.10"
    assert fmt.correlation(1.0) == "+1.00"
    assert fmt.correlation(None) == "n/a"
    assert fmt.correlation(float("nan")) == "n/a"


def test_a_column_lines_up():
    """Every entry of a column gets the same number of decimals, chosen from its largest value.

    Reference: worked example from the issue that asked for this ([0.0803, 0.074, 0.00563, 8.01e-05]).
    """
    col = fmt.column([0.0803, 0.074, 0.00563, 8.01e-05])
    assert col == ["0.0803", "0.0740", "0.0056", "0.0001"]
    assert len({len(c) for c in col}) == 1
    assert fmt.column([12.5, 3.75]) == ["12.5", "3.8"]
    assert fmt.column([0.5, -0.25], sign=True) == ["+0.500", "\u22120.250"]
    assert fmt.column([0.0, 0.0]) == ["0.000", "0.000"]


def test_counts_agree_with_their_noun():
    """Singular for one, plural otherwise, thousands separated.

    Reference: English grammar; common practice, no source.
    """
    assert fmt.count(1, "utterance") == "1 utterance"
    assert fmt.count(0, "row") == "0 rows"
    assert fmt.count(3, "query", "queries") == "3 queries"
    assert fmt.count(5130, "utterance") == "5,130 utterances"


def test_durations():
    """Seconds to the short forms used by progress estimates.

    Reference: arithmetic (60 s = 1 min, 3600 s = 1 h); common practice, no source.
    """
    assert fmt.duration(0.42) == "0.4 s"
    assert fmt.duration(12.2) == "12 s"
    assert fmt.duration(185) == "3 min 05 s"
    assert fmt.duration(3720) == "1 h 02 min"
    assert fmt.duration(float("nan")) == "unknown"
