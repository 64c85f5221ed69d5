"""Journal-style numbers of the methods paragraph (APA 7th ed., section 6.36: no leading zero
for statistics that cannot exceed 1)."""

from coderel.report.methods_text import alpha_phrase, fmt_coef, fmt_interval, number_word


def test_bounded_coefficients_lose_the_leading_zero():
    assert fmt_coef(0.8412) == ".84"
    assert fmt_coef(0.8, 3) == ".800"
    assert fmt_coef(1.0) == "1.00"
    assert fmt_coef(-0.1234) == "\u2212.12"
    assert fmt_coef(None) == "–"


def test_alpha_phrase_has_interval_in_brackets():
    assert alpha_phrase(0.8412, 0.7913, 0.8801, 95) == "α = .84, 95% CI [.79, .88]"
    assert fmt_interval(None, 0.5) == ""


def test_small_numbers_in_words():
    assert number_word(3, capital=True) == "Three"
    assert number_word(12) == "12"
